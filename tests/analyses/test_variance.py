"""forest.variance: the jackknife and infinitesimal jackknife of Wager, Hastie & Efron (2014), against their
definitions written as loops, closed forms for the bagged mean, and the truth by Monte Carlo."""

from __future__ import annotations

import dataclasses
import math
import warnings

import numpy as np
import pytest

import forestlab as fl
from forestlab.analyses.uncertainty.variance import variance
from forestlab.synthetic import friedman1


def loop_reference(forest, X, column=None):
    """V_IJ, V_J and their bias-corrected forms from the definitions in Wager, Hastie & Efron (2014), JMLR 15,
    eqs. 5-9, with a Python loop over cases and numpy.cov for every covariance."""
    t = forest.per_tree(X).astype(np.float64)
    if column is not None:
        t = (t == column).astype(np.float64)
    N = forest.inbag.astype(np.float64)
    B, n = N.shape
    t_bar = t.mean(axis=0)
    ij = np.zeros(t.shape[1])
    jack = np.zeros(t.shape[1])
    for i in range(n):
        for r in range(t.shape[1]):
            ij[r] += np.cov(N[:, i], t[:, r], bias=True)[0, 1] ** 2       # Cov_b with divisor B
        out = N[:, i] == 0
        jack += (t[out].mean(axis=0) - t_bar) ** 2                      # t_bar_(-i): trees with i out-of-bag
    jack *= (n - 1) / n
    spread = ((t - t_bar) ** 2).sum(axis=0) / B**2
    return ij, jack, ij - n * spread, jack - (math.e - 1) * n * spread


def small_problem(task, seed, n=14, trees=600, **options):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    score = X[:, 0] + 0.5 * rng.normal(size=n)
    y = score if task == "regression" else np.digitize(score, [-0.4, 0.4] if task == "three" else [0.0])
    forest = fl.Forest(trees=trees, rng=seed, min_leaf=2, task="regression" if task == "regression" else None,
                       **options).fit(X, y)
    return forest, rng.normal(size=(7, 3))


class TestAgainstTheDefinitions:
    @pytest.mark.parametrize("seed, n, trees", [(0, 14, 600), (1, 14, 600), (2, 60, 45)],
                             ids=["more trees than cases", "again", "fewer trees than cases"])
    def test_regression(self, seed, n, trees):
        forest, X = small_problem("regression", seed, n=n, trees=trees)
        ij, jack, ij_u, jack_u = loop_reference(forest, X)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", fl.FewTreesWarning)     # 45 trees for 60 cases: noisy, but exact
            result = forest.variance(X)
        # double precision throughout (quadratic forms in Gram matrices): equal to rounding
        for got, want in [(result.ij_uncorrected, ij), (result.jackknife_uncorrected, jack), (result.ij, ij_u),
                          (result.jackknife, jack_u)]:
            np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-12 * float(np.max(jack)))
        np.testing.assert_allclose(result.estimate, (ij_u + jack_u) / 2, rtol=1e-9, atol=1e-12 * float(np.max(jack)))
        np.testing.assert_allclose(result.prediction, forest.predict(X))
        assert result.trees == trees and result.cases == n == result.draws and result.method == "average"

    @pytest.mark.parametrize("task", ["two", "three"])
    def test_classification_vote_shares(self, task):
        forest, X = small_problem(task, 5)
        result = forest.variance(X, method="jackknife")
        assert result.estimate.shape == (7, forest.classes.size) and result.ij is None
        for k in range(forest.classes.size):
            ij, jack, ij_u, jack_u = loop_reference(forest, X, column=k)
            np.testing.assert_allclose(result.jackknife[:, k], jack_u, rtol=1e-9, atol=1e-14)
            np.testing.assert_allclose(result.jackknife_uncorrected[:, k], jack, rtol=1e-9, atol=1e-14)
        np.testing.assert_allclose(result.prediction, forest.votes(X))
        ij_only = forest.variance(X, method="ij")
        for k in range(forest.classes.size):
            np.testing.assert_allclose(ij_only.ij[:, k], loop_reference(forest, X, column=k)[2], rtol=1e-9,
                                       atol=1e-14)

    def test_subsampled_form(self):
        # Wager & Athey (2018), JASA 113, section 4.1: V_IJ = ((n-1)/n) (n/(n-s))^2 sum_i Cov(N_i, t)^2; the
        # Monte Carlo term carries the same factor times the summed variances of the 0/1 counts, s (n-s)/n.
        forest, X = small_problem("regression", 3, sample_size=8, replace=False)
        ij, _, _, _ = loop_reference(forest, X)
        n, s, B = 14, 8, 600
        t = forest.per_tree(X)
        spread = ((t - t.mean(axis=0)) ** 2).sum(axis=0) / B**2
        factor = (n - 1) / n * (n / (n - s)) ** 2
        result = forest.variance(X)
        assert result.method == "ij" and result.jackknife is None and not result.replace
        np.testing.assert_allclose(result.ij_uncorrected, factor * ij, rtol=1e-9)
        np.testing.assert_allclose(result.ij, factor * (ij - s * (n - s) / n * spread), rtol=1e-9, atol=1e-14)


@pytest.fixture(scope="module")
def data():
    rng = np.random.default_rng(4)
    return rng.normal(size=(30, 2)), rng.normal(size=30)


class TestClosedFormsForTheBaggedMean:
    """Trees of one leaf predict the (count-weighted) mean of their sample, so the forest with infinitely many
    trees is the sample mean, whose infinitesimal jackknife variance is sum (y_i - y_bar)^2 / n^2 and whose
    jackknife variance is s^2 / n (Efron & Tibshirani 1993, "An introduction to the bootstrap", chapters 10-11;
    the same limits in Wager, Hastie & Efron 2014, section 2; the subsampled IJ of Wager & Athey 2018 gives
    s^2 / n too, as its factor is chosen to)."""

    @pytest.mark.parametrize("options", [{}, {"sample_size": 15}, {"replace": False, "sample_size": 15}],
                             ids=["bootstrap", "half-bootstrap", "half-subsample"])
    def test_many_trees(self, data, options):
        X, y = data
        forest = fl.Forest(trees=10_000, depth_limit=0, rng=1, **options).fit(X, y)
        result = forest.variance(X[:1])
        plug_in, unbiased = np.sum((y - y.mean()) ** 2) / 30**2, y.var(ddof=1) / 30
        # Monte Carlo sd of a corrected estimate with correction c: sqrt(2 c^2 / n + 4 V c / n) (the sum over
        # cases of squared normal noise of variance c / n added to the covariances); measured within 1.5 sd
        n, m, mc = 30, result.draws, result.monte_carlo[0]
        def sd(c, v):
            return np.sqrt(2 * c**2 / n + 4 * v * c / n)
        if options.get("replace", True):
            assert abs(result.ij[0] - plug_in) < 4 * sd(m * mc, plug_in)
            assert abs(result.jackknife[0] - unbiased) < 4 * sd(n * math.expm1(m / n) * mc, unbiased)
            assert 4 * sd(n * math.expm1(m / n) * mc, unbiased) < 0.15 * unbiased
        else:
            assert abs(result.ij[0] - unbiased) < 4 * sd(result.ij_uncorrected[0] - result.ij[0], unbiased)

    @pytest.mark.slow
    def test_correction_removes_the_monte_carlo_bias(self, data):
        # 300 independent forests of 100 one-leaf trees each on the same data (one fit of 30 000 trees, cut
        # into blocks): the corrected estimates average to the limits above, the uncorrected ones do not.
        X, y = data
        forest = fl.Forest(trees=30_000, depth_limit=0, rng=2).fit(X, y)
        view = forest._view
        estimates = []
        for start in range(0, 30_000, 100):
            part = dataclasses.replace(view, trees=view.trees[start:start + 100], inbag=view.inbag[start:start + 100])
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", fl.FewTreesWarning)   # it warns, rightly, for most of them
                got = variance(part, X[:1])
            estimates.append([got.ij[0], got.jackknife[0], got.ij_uncorrected[0], got.jackknife_uncorrected[0]])
        estimates = np.array(estimates)
        plug_in, unbiased = np.sum((y - y.mean()) ** 2) / 30**2, y.var(ddof=1) / 30
        ratios = estimates.mean(axis=0) / [plug_in, unbiased, plug_in, unbiased]
        error = 3 * estimates.std(axis=0) / np.sqrt(len(estimates)) / [plug_in, unbiased, plug_in, unbiased]
        print(ratios, error)
        # measured: corrected 0.99 and 0.99 (3 sd of the mean 0.05 and 0.06), uncorrected 1.29 and 1.49
        assert abs(ratios[0] - 1) < error[0] + 0.03 and abs(ratios[1] - 1) < error[1] + 0.03
        assert ratios[2] > 1.2 and ratios[3] > 1.4


class TestMessages:
    def test_bad_input(self):
        forest, X = small_problem("regression", 0)
        with pytest.raises(ValueError, match="`method` must be one of"):
            forest.variance(X, method="bootstrap")
        sub, _ = small_problem("regression", 0, sample_size=8, replace=False)
        with pytest.raises(ValueError, match="`method` = 'jackknife' needs bootstrap draws"):
            sub.variance(X, method="jackknife")
        few, _ = small_problem("regression", 0, trees=3)
        with pytest.raises(ValueError, match="needs every training case out-of-bag for at least one tree"):
            few.variance(X)
        balanced, _ = small_problem("two", 0, balance="classes")
        with pytest.raises(ValueError, match="class-balanced samples"):
            balanced.variance(X)
        whole, _ = small_problem("regression", 0, sample_size=14, replace=False)
        with pytest.raises(ValueError, match="every tree of this forest holds every case"):
            whole.variance(X)
        with pytest.raises(ValueError, match="`X` must have 3 features, as in training"):
            forest.variance(X[:, :2])

    def test_few_trees_warn(self):
        X, y = friedman1(400, rng=1)
        with pytest.warns(fl.FewTreesWarning, match="Monte Carlo noise of about"):
            fl.Forest(trees=40, rng=1).fit(X, y).variance(X[:20])

    def test_print(self):
        forest, X = small_problem("three", 1)
        text = str(forest.variance(X))
        assert text.startswith("Sampling variance of the forest's prediction at 7 rows (average of the")
        assert "share 0" in text and "+-" in text


@pytest.mark.slow
def test_monte_carlo_truth_friedman1():
    """The paper's own check (Wager, Hastie & Efron 2014, section 4): the variance of the forest's prediction
    over independent training sets against the mean of the estimates. Friedman #1 (Friedman 1991, Annals of
    Statistics 19), n = 200, 100 training sets, 20 fixed points; each forest has 400 trees and its first 50
    and 200 trees serve as the smaller forests (the truth is the variance of the 400-tree prediction)."""
    points, _ = friedman1(20, rng=999)
    sizes = (50, 200, 400)
    predictions, estimates, warned = [], {b: [] for b in sizes}, {b: 0 for b in sizes}
    for r in range(100):
        X, y = friedman1(200, rng=1000 + r)
        view = fl.Forest(trees=400, rng=r).fit(X, y)._view
        for b in sizes:
            part = dataclasses.replace(view, trees=view.trees[:b], inbag=view.inbag[:b])
            with warnings.catch_warnings(record=True) as caught:   # single estimates are noisy here (B <= 2n)
                warnings.simplefilter("always", fl.FewTreesWarning)
                got = variance(part, points)
            warned[b] += len(caught)
            estimates[b].append([got.ij, got.jackknife, got.estimate, got.ij_uncorrected, got.jackknife_uncorrected])
        predictions.append(got.prediction)
    truth = np.var(predictions, axis=0, ddof=1)
    # mean over the points of (mean estimate / truth); the truth's own Monte Carlo error is about 14% a point
    ratio = {b: np.mean(np.mean(estimates[b], axis=0) / truth, axis=1) for b in sizes}
    print({b: np.round(v, 2).tolist() for b, v in ratio.items()}, warned)
    ij, jack, average, ij_raw, jack_raw = ratio[400]
    # measured (IJ-U, J-U, average, IJ, J): 400 trees 0.76, 1.40, 1.08, 10.4, 18.2; 200 trees 0.70, 1.64,
    # 1.17, 21.3, 37.0; 50 trees 0.96, 12.7, 6.8, 82, 152
    assert 0.55 < ij < 1.05 and 1.0 < jack < 1.8 and 0.8 < average < 1.35
    assert ratio[200][2] < 1.5
    assert ij_raw > 4 and jack_raw > 8
    assert ratio[50][3] > ratio[200][3] > ratio[400][3] and ratio[50][4] > ratio[200][4] > ratio[400][4]
