"""oob.doubtful(fdr=..., trusted=...): conformal p-values against trusted cases (Bates, Candes, Lei, Romano &
Sesia 2023) and the Benjamini-Hochberg rule, against their definitions, scipy, and label noise on twonorm."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats

import forestlab as fl
from forestlab.analyses.uncertainty.conformal import benjamini_hochberg, conformal_p_values
from forestlab.synthetic import twonorm


def flipped_twonorm(n, seed, share=0.05):
    """Breiman's (1996) twonorm with a share of the labels flipped at random."""
    rng = np.random.default_rng(seed)
    X, y = twonorm(n, rng=seed)
    flip = rng.random(n) < share
    return X, np.where(flip, 1 - y, y), flip, rng


@given(st.lists(st.floats(0, 1), min_size=1, max_size=40), st.sampled_from([0.05, 0.1, 0.3]))
def test_benjamini_hochberg_agrees_with_scipy(p, q):
    # scipy.stats.false_discovery_control gives the BH adjusted p-values (Benjamini & Hochberg 1995): a
    # hypothesis is rejected at level q exactly when its adjusted p-value is at most q.
    p = np.array(p)
    chosen = benjamini_hochberg(p, q)
    with np.errstate(under="ignore"):  # (the reference multiplies subnormal p-values, which may underflow)
        adjusted = stats.false_discovery_control(p, method="bh")
    want = np.flatnonzero(adjusted <= q * (1 + 1e-12))
    assert sorted(chosen.tolist()) == want.tolist()
    assert np.all(np.diff(p[chosen]) >= 0)


def test_p_values_against_their_definition():
    # Bates et al. (2023), eq. (3): p = (1 + #{calibration scores >= test score}) / (t + 1)
    rng = np.random.default_rng(0)
    calibration, test = rng.integers(0, 6, size=30).astype(float), np.arange(-1.0, 7.0)
    want = [(1 + sum(c >= s for c in calibration)) / 31 for s in test]
    np.testing.assert_allclose(conformal_p_values(test, calibration), want)


@pytest.fixture(scope="module")
def fitted():
    X, y, flip, _ = flipped_twonorm(600, 1)
    return fl.Forest(trees=200, rng=1).fit(X, y), y, flip


class TestDoubtfulByFdr:
    def test_p_values_and_selection_by_loops(self, fitted):
        forest, y, flip = fitted
        trusted = np.random.default_rng(3).choice(np.flatnonzero(~flip), 300, replace=False)
        got = forest.oob.doubtful(fdr=0.2, trusted=trusted)
        # the same selection from a loop over cases: each untrusted case against the trusted cases of its label
        votes, is_trusted = forest.oob.votes, np.isin(np.arange(600), trusted)
        p = {}
        for j in np.flatnonzero(~is_trusted):
            own = 1 - votes[j, y[j]]
            same = [1 - votes[i, y[i]] for i in trusted if y[i] == y[j]]
            p[j] = (1 + sum(s >= own for s in same)) / (len(same) + 1)
        cases = np.array(sorted(p))
        values = np.array([p[j] for j in cases])
        ranked = np.sort(values)
        passing = np.flatnonzero(ranked <= 0.2 * np.arange(1, len(values) + 1) / len(values))
        want = set(cases[values <= ranked[passing[-1]]]) if passing.size else set()
        assert set(got.case.tolist()) == want and len(got) > 0
        np.testing.assert_allclose(got.p_value, [p[j] for j in got.case])
        assert np.all(np.diff(got.p_value) >= 0)
        assert got.tested == 300 and got.fdr == 0.2
        assert got.rule == "Benjamini-Hochberg at false discovery rate 0.2: 300 cases tested against 300 trusted"
        assert "p-value" in str(got).splitlines()[1]
        assert len(forest.oob.doubtful(fdr=0.2, trusted=is_trusted, top=3)) == 3
        # the old forms are unchanged
        assert len(forest.oob.doubtful()) == int(np.sum(forest.oob.margins < 0))

    def test_regression_uses_absolute_residuals(self):
        rng = np.random.default_rng(2)
        X = rng.normal(size=(300, 3))
        y = X[:, 0] + 0.3 * rng.normal(size=300)
        y[:10] += 6.0                                           # ten gross errors
        forest = fl.Forest(trees=200, rng=2).fit(X, y)
        trusted = np.arange(100, 300)
        got = forest.oob.doubtful(fdr=0.1, trusted=trusted)
        residual = np.abs(forest.oob.residuals)
        for j, pj in zip(got.case, got.p_value):
            assert pj == pytest.approx((1 + np.sum(residual[trusted] >= residual[j])) / 201)
        assert set(range(10)) <= set(got.case.tolist())

    def test_ranking_against_the_training_cases_flags_nothing(self, fitted):
        # The reason for `trusted`: against the other training cases, the k-th strangest of n gets p about k/n,
        # and BH needs p_(k) <= k q / n: never for q < 1. With 5% flipped labels, nothing is flagged, while a
        # trusted set of the same data flags many.
        forest, y, flip = fitted
        scores = 1 - forest.oob.votes[np.arange(600), y]
        p = np.array([conformal_p_values(scores[j:j + 1], np.delete(scores, j))[0] for j in range(600)])
        assert benjamini_hochberg(p, 0.1).size == 0 and benjamini_hochberg(p, 0.3).size == 0
        trusted = np.random.default_rng(4).choice(np.flatnonzero(~flip), 400, replace=False)
        assert len(forest.oob.doubtful(fdr=0.1, trusted=trusted)) > 5

    def test_messages(self, fitted):
        forest, y, flip = fitted
        with pytest.raises(ValueError, match="`fdr` and `trusted` go together"):
            forest.oob.doubtful(fdr=0.1)
        with pytest.raises(ValueError, match="`fdr` and `trusted` go together"):
            forest.oob.doubtful(trusted=[1, 2])
        with pytest.raises(ValueError, match="`fdr` must lie strictly between 0 and 1"):
            forest.oob.doubtful(fdr=1.5, trusted=[1, 2])
        with pytest.raises(ValueError, match="`threshold` does not apply with `fdr`"):
            forest.oob.doubtful(0.5, fdr=0.1, trusted=[1, 2])
        with pytest.raises(ValueError, match="`trusted` holds case indices outside 0 .. 599"):
            forest.oob.doubtful(fdr=0.1, trusted=[600])
        with pytest.raises(ValueError, match="one entry per training case"):
            forest.oob.doubtful(fdr=0.1, trusted=np.ones(10, dtype=bool))
        with pytest.raises(TypeError, match="`trusted` must be a 1-D array"):
            forest.oob.doubtful(fdr=0.1, trusted=["a"])
        # 8 trusted cases of a class give p >= 1/9 > 0.1: nothing of that class can be flagged
        with pytest.warns(fl.SmallTrustedSetWarning, match=r"no case of class 0, 1 can be flagged at fdr=0.1"):
            got = forest.oob.doubtful(fdr=0.1, trusted=np.flatnonzero(y == 0)[:8].tolist()
                                      + np.flatnonzero(y == 1)[:8].tolist())
        assert len(got) == 0


@pytest.mark.slow
def test_false_discovery_rate_and_power_on_twonorm():
    """Twonorm (Breiman 1996), n = 1500, 5% of labels flipped, 20 repetitions, a random trusted sample of the
    unflipped cases of 300, 500 or 1000 cases. The false discovery proportion of doubtful(fdr=0.1) averages at
    most 0.1 (Bates et al. 2023, Theorem 3 with Benjamini & Hochberg 1995), and the power (share of the flipped
    labels found) grows with the trusted set. Measured: FDP 0.017 / 0.048 / 0.080, power 0.09 / 0.70 / 0.91.
    With 300 trusted cases (about 150 a class) the smallest p-value, 1/151, needs over 100 cases flagged
    together among about 1400 tested (k >= m / (q (t + 1))), about as many as there are flipped labels."""
    sizes = (300, 500, 1000)
    fdp, power = {t: [] for t in sizes}, {t: [] for t in sizes}
    for r in range(20):
        X, y, flip, rng = flipped_twonorm(1500, 100 + r)
        oob = fl.Forest(trees=300, rng=r).fit(X, y).oob
        for t in sizes:
            found = flip[oob.doubtful(fdr=0.1, trusted=rng.choice(np.flatnonzero(~flip), t, replace=False)).case]
            fdp[t].append(np.mean(~found) if found.size else 0.0)
            power[t].append(found.sum() / flip.sum())
    print({t: (round(float(np.mean(fdp[t])), 3), round(float(np.mean(power[t])), 3)) for t in sizes})
    for t in sizes:
        assert np.mean(fdp[t]) <= 0.1 + 3 * np.std(fdp[t], ddof=1) / math.sqrt(20)
    assert np.mean(power[500]) > 0.5 and np.mean(power[1000]) > 0.8
    assert np.mean(power[300]) < np.mean(power[500]) < np.mean(power[1000])
