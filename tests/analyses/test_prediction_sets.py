"""forest.prediction_sets: out-of-bag conformal sets with the adaptive score of Romano, Sesia & Candes (2020),
against a loop over trees and cases, and their coverage overall and within every class."""

from __future__ import annotations

import math

import numpy as np
import pytest

import forestlab as fl
from forestlab.synthetic import waveform


def small_forest(seed=0, n=60, trees=80):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    y = np.digitize(X[:, 0] + 0.8 * rng.normal(size=n), [-0.5, 0.6])
    labels = np.array(["low", "mid", "high"])[y]
    return fl.Forest(trees=trees, rng=seed).fit(X, labels), X, labels, rng.normal(size=(15, 3))


def sets_loop(forest, X, labels, X_new, level, by_class, seed):
    """The sets from their definition (Romano, Sesia & Candes 2020, eq. 5 and Algorithm 1 with the out-of-bag
    votes as the calibration set; Vovk, Gammerman & Shafer 2005 for the (n + 1) rank), one tree, case and class
    at a time. The uniforms come from the documented children 0 and 1 of the seed."""
    classes = list(forest.classes)
    train, new = forest.per_tree(X), forest.per_tree(X_new)
    u_cal = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0,))).random(len(X))
    u_new = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(1,))).random(len(X_new))

    def score(shares, k, u):
        return sum(s for s in shares if s > shares[k]) + u * sum(s for s in shares if s == shares[k])

    calibration = {k: [] for k in range(len(classes))}
    for i in range(len(X)):
        out = [b for b in range(forest.trees) if forest.inbag[b, i] == 0]
        shares = [sum(train[b, i] == k for b in out) / len(out) for k in range(len(classes))]
        k = classes.index(labels[i])
        calibration[k if by_class else 0].append(score(shares, k, u_cal[i]))

    def bar(scores):
        rank = math.ceil(level * (len(scores) + 1))
        return sorted(scores)[rank - 1] if rank <= len(scores) else math.inf

    bars = [bar(calibration[k if by_class else 0]) for k in range(len(classes))]
    members = np.zeros((len(X_new), len(classes)), dtype=bool)
    for r in range(len(X_new)):
        shares = [np.mean(new[:, r] == k) for k in range(len(classes))]
        for k in range(len(classes)):
            members[r, k] = score(shares, k, u_new[r]) <= bars[k]
    return members, np.array(bars)


@pytest.mark.parametrize("by_class", [False, True])
@pytest.mark.parametrize("level", [0.6, 0.9])
def test_equals_the_loop(level, by_class):
    forest, X, labels, X_new = small_forest()
    got = forest.prediction_sets(X_new, level=level, by_class=by_class, rng=3)
    members, bars = sets_loop(forest, X, labels, X_new, level, by_class, 3)
    np.testing.assert_array_equal(got.members, members)
    np.testing.assert_allclose(got.thresholds, bars, rtol=1e-12)
    np.testing.assert_allclose(got.shares, forest.votes(X_new))
    assert got.calibration.tolist() == [int(np.sum(labels == c)) for c in forest.classes]


def test_sets_read_as_labels_and_cover():
    forest, X, labels, X_new = small_forest()
    got = forest.prediction_sets(X_new, level=0.8, rng=1)
    assert got.size.tolist() == np.count_nonzero(got.members, axis=1).tolist()
    assert got.empty == int(np.sum(got.size == 0)) and got.full == int(np.sum(got.size == 3))
    first = got.labels(0)
    assert set(first) == {c for c, m in zip(got.classes, got.members[0]) if m}
    assert all(isinstance(label, str) for label in first)
    truth = np.array(["low"] * 15)
    np.testing.assert_array_equal(got.covers(truth), got.members[:, list(got.classes).index("low")])
    assert not got.covers(np.array(["none"] * 15)).any()
    text = str(got)
    assert text.startswith("80% prediction sets at 15 rows (out-of-bag conformal, adaptive score, coverage over "
                           "all classes; 60 calibration cases)")
    assert "share high" in text


def test_messages():
    forest, X, labels, X_new = small_forest()
    with pytest.raises(ValueError, match="`level` must lie strictly between 0 and 1"):
        forest.prediction_sets(X_new, level=0)
    with pytest.raises(TypeError, match="`by_class` must be a bool"):
        forest.prediction_sets(X_new, by_class="yes")
    with pytest.raises(TypeError, match="`prediction_sets` is for classification forests"):
        fl.Forest(trees=10, rng=1).fit(X, X[:, 0]).prediction_sets(X_new)
    # the same seed gives the same sets; another seed other draws
    a, b = forest.prediction_sets(X_new, rng=5), forest.prediction_sets(X_new, rng=5)
    np.testing.assert_array_equal(a.members, b.members)


def imbalanced_waveform(n, rng, shares=(0.70, 0.22, 0.08)):
    """Breiman, Friedman, Olshen & Stone (1984) waveform, its three classes thinned to the given shares."""
    X, y = waveform(6 * n, rng=rng)
    keep = np.concatenate([rng.choice(np.flatnonzero(y == k), round(s * n), replace=False)
                           for k, s in enumerate(shares)])
    rng.shuffle(keep)
    return X[keep], y[keep]


@pytest.fixture(scope="module")
def waveform_runs():
    """Three training sets of 1500 cases (70 / 22 / 8% of the classes) with 5000 fresh cases each: coverage
    overall and per class of marginal and by-class sets at 80 and 90%."""
    found = {}
    for r in range(3):
        rng = np.random.default_rng(r)
        (X, y), (X_new, y_new) = imbalanced_waveform(1500, rng), imbalanced_waveform(5000, rng)
        forest = fl.Forest(trees=300, rng=r).fit(X, y)
        for level in (0.8, 0.9):
            for by_class in (False, True):
                hit = forest.prediction_sets(X_new, level=level, by_class=by_class, rng=r).covers(y_new)
                per_class = [hit[y_new == k].mean() for k in range(3)]
                found.setdefault((level, by_class), []).append([hit.mean()] + per_class)
    return {key: np.array(value) for key, value in found.items()}


@pytest.mark.slow
@pytest.mark.parametrize("level", [0.8, 0.9])
def test_marginal_coverage(waveform_runs, level):
    # a binomial proportion over 15 000 fresh cases and three training sets: 3 standard errors of the mean
    # of the runs, at least the binomial one. Measured: 0.807 at 80%, 0.903 at 90%.
    runs = waveform_runs[level, False][:, 0]
    error = max(math.sqrt(level * (1 - level) / 15_000), runs.std(ddof=1) / math.sqrt(3))
    assert abs(runs.mean() - level) < 3 * error


@pytest.mark.slow
@pytest.mark.parametrize("level", [0.8, 0.9])
def test_coverage_within_every_class_with_by_class(waveform_runs, level):
    # Mondrian conformal prediction (Vovk, Gammerman & Shafer 2005, chapter 4): coverage holds within every
    # class. The rarest class has about 3 x 400 fresh cases. Measured at 80%: 0.802, 0.804, 0.801 with
    # by_class, against 0.847, 0.771, 0.548 for the marginal sets, which cover the rare class far less.
    per_class = waveform_runs[level, True][:, 1:].mean(axis=0)
    rare = 3 * 5000 * 0.08
    assert np.all(per_class > level - 3 * math.sqrt(level * (1 - level) / rare))
    assert np.all(per_class < level + 0.05)
    assert waveform_runs[level, False][:, 3].mean() < level - 0.1
