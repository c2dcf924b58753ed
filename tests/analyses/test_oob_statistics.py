"""Out-of-bag estimates against outside references: test sets, cross-validation and Breiman's theory."""

from __future__ import annotations

import numpy as np
import pytest
from refdata import load_table

import forestlab as fl
from forestlab.synthetic import friedman1, threenorm, twonorm

PUBLIC = ["sonar", "ionosphere", "glass", "breastcancer", "pimaindiansdiabetes"]


@pytest.fixture(scope="module")
def public_forests():
    """One 100-tree forest and one 10-fold CV (same settings) per public data set (breastcancer has NaNs)."""
    out = {}
    for name in PUBLIC:
        X, y, _ = load_table(name)
        forest = fl.Forest(trees=100, rng=1).fit(X, y)
        out[name] = (forest, fl.cross_validated_error(fl.Forest(trees=100), X, y, folds=10, rng=1))
    return out


def test_share_out_of_bag_per_tree_is_about_one_over_e():
    # Breiman (1996), "Out-of-bag estimation": about 37% of the cases are left out of each bootstrap sample;
    # exactly, P(case left out) = (1 - 1/n)^n -> 1/e (common practice).
    n, trees = 1000, 300
    X, y = twonorm(n, dims=2, rng=11)
    forest = fl.Forest(trees=trees, depth_limit=0, rng=12).fit(X, y)
    share = forest.oob.coverage.sum() / (n * trees)
    expected = (1 - 1 / n) ** n
    # sd of the number of empty cells of one tree is about sqrt(n e^-1 (1 - 2 e^-1)) (occupancy problem)
    sd = np.sqrt(n * np.exp(-1) * (1 - 2 * np.exp(-1)) / trees) / n
    assert abs(share - expected) < 4 * sd
    assert abs(expected - np.exp(-1)) < 2e-4


@pytest.mark.slow
@pytest.mark.parametrize("make", [twonorm, threenorm], ids=["twonorm", "threenorm"])
def test_oob_error_agrees_with_a_large_test_set(make):
    # Breiman (1996), "Out-of-bag estimation": the OOB error estimates the test-set error. Both are binomial
    # proportions; we allow 3 standard errors of their difference. At n = 400 we measured OOB errors about
    # 1.6 points above the test error on twonorm (5 seeds), the small-n upward bias reported by Janitza &
    # Hornung (2018, "On the overestimation of random forest's out-of-bag error", PLoS ONE; from memory),
    # so the check uses n = 1000.
    X, y = make(1000, rng=0)
    X_test, y_test = make(5000, rng=100)
    forest = fl.Forest(trees=200, rng=0).fit(X, y)
    oob, test = forest.oob.error, np.mean(forest.predict(X_test) != y_test)
    se = np.sqrt(test * (1 - test) * (1 / 1000 + 1 / 5000))
    assert abs(oob - test) < 3 * se, (oob, test, se)
    assert forest.oob.error_bound >= oob        # Breiman (2001), "Random forests", Theorem 2.3


@pytest.mark.slow
def test_oob_mean_squared_error_agrees_with_a_large_test_set():
    # Breiman (1996), "Out-of-bag estimation", for regression on Friedman #1 (Friedman 1991): OOB mean squared
    # error within 3 standard errors of the test-set mean squared error (each from its squared residuals).
    X, y = friedman1(1000, rng=0)
    X_test, y_test = friedman1(5000, rng=100)
    forest = fl.Forest(trees=200, rng=0).fit(X, y)
    squared_test = (forest.predict(X_test) - y_test) ** 2
    squared_oob = forest.oob.residuals ** 2
    se = np.sqrt(np.var(squared_oob) / 1000 + np.var(squared_test) / 5000)
    assert abs(forest.oob.error - squared_test.mean()) < 3 * se
    assert 0.5 < forest.oob.explained_variance < 1


@pytest.mark.slow
@pytest.mark.parametrize("name", PUBLIC)
def test_oob_error_close_to_ten_fold_cv(public_forests, name):
    # Breiman (1996), "Out-of-bag estimation": OOB is as accurate as cross-validation (public UCI data sets,
    # tests/data). Measured |OOB - CV| / sqrt(e(1-e)/n): sonar 1.6, ionosphere 1.2, glass 0.8, breastcancer
    # 0.2, pimaindiansdiabetes 0.5; we allow 3.
    forest, cv = public_forests[name]
    e = forest.oob.error
    assert abs(e - cv.mean) < 3 * np.sqrt(e * (1 - e) / forest.inbag.shape[1]), (e, cv.mean)


@pytest.mark.slow
@pytest.mark.parametrize("name", PUBLIC)
def test_breiman_bound_is_at_least_the_oob_error(public_forests, name):
    # Breiman (2001), "Random forests", Theorem 2.3: PE* <= rho-bar (1 - s^2) / s^2, with s and rho-bar
    # estimated out-of-bag as in his appendix II; checked against the OOB error on each data set.
    oob = public_forests[name][0].oob
    assert 0 < oob.strength <= 1 and 0 < oob.correlation <= 1
    assert oob.error_bound >= oob.error


@pytest.mark.slow
def test_correlation_falls_as_fewer_candidates_are_offered():
    # Breiman (2001), "Random forests", section 4 (qualitative): fewer candidate features per split give less
    # correlated trees. Measured on twonorm (n = 400): rho-bar 0.10 (m = 1), 0.13 (m = 4), 0.15 (all 20).
    X, y = twonorm(400, rng=4)
    samplers = [fl.RandomSubset(1), fl.RandomSubset(4), fl.AllFeatures()]
    rho = [fl.Forest(trees=150, sampler=s, rng=3).fit(X, y).oob.correlation for s in samplers]
    assert rho[0] < rho[1] < rho[2]


@pytest.mark.slow
def test_flipped_labels_rank_near_the_top_of_doubtful():
    # Common practice: cases whose OOB vote goes against their label are the first candidates for label
    # errors. Twonorm (Breiman 1996, tech. report 460) with 5% of the labels flipped on purpose. Measured recall
    # of the top 30 doubtful cases: 0.80, 0.80, 0.87 (seeds 1-3); the list of every wrong-vote case (margin < 0)
    # caught 93-97% of the flips. Bayes error 2.3%, so a few flips land on the "right" side of the boundary and
    # cannot be found.
    X, y = twonorm(600, rng=1)
    flipped = np.random.default_rng(11).choice(600, size=30, replace=False)
    y = y.copy()
    y[flipped] = 1 - y[flipped]
    oob = fl.Forest(trees=200, rng=1).fit(X, y).oob
    assert np.isin(oob.doubtful(top=30).case, flipped).mean() >= 0.7
    assert np.isin(flipped, oob.doubtful().case).mean() >= 0.85
