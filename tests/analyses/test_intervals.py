"""forest.intervals and forest.quantiles: jackknife+-after-bootstrap (Kim, Xu & Barber 2020) and quantile
regression forests (Meinshausen 2006), against loops over trees, NumPy's weighted quantiles, and coverage."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

import forestlab as fl
from forestlab.engine.tree import leaf_index


def small_forest(seed=0, n=25, trees=150, **options):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    y = X[:, 0] + np.abs(X[:, 1]) * rng.normal(size=n)
    return fl.Forest(trees=trees, rng=seed, min_leaf=3, **options).fit(X, y), X, y, rng.normal(size=(9, 3))


def jackknife_plus_loop(forest, X, y, X_new, level):
    """Kim, Xu & Barber (2020), Algorithm 1 (J+aB with the mean as aggregation), one case at a time."""
    train, new = forest.per_tree(X), forest.per_tree(X_new)
    n, alpha = len(y), 1 - level
    low, high = [], []
    for i in range(n):
        out = forest.inbag[:, i] == 0
        residual = abs(y[i] - train[out, i].mean())
        mu = new[out].mean(axis=0)
        low.append(mu - residual)
        high.append(mu + residual)
    low, high = np.sort(low, axis=0), np.sort(high, axis=0)
    k_low, k_high = math.floor(alpha * (n + 1)), math.ceil((1 - alpha) * (n + 1))
    lower = low[k_low - 1] if k_low >= 1 else np.full(len(X_new), -np.inf)
    upper = high[k_high - 1] if k_high <= n else np.full(len(X_new), np.inf)
    return lower, upper


def quantile_forest_weights(forest, X, X_new, counts, case_weights=None):
    """Meinshausen (2006), eq. 4-6: w_i(x) = mean over trees of c_bi [same leaf] / sum_j c_bj [same leaf], one
    tree and one new row at a time (c_bi: in-bag count or 1, times the case weight)."""
    n = X.shape[0]
    w = np.zeros((len(X_new), n))
    for b, tree in enumerate(forest._view.trees):
        c = forest.inbag[b].astype(float) if counts == "bootstrap" else np.ones(n)
        c = c if case_weights is None else c * case_weights
        train, new = leaf_index(tree, X), leaf_index(tree, X_new)
        for r in range(len(X_new)):
            share = c * (train == new[r])
            w[r] += share / share.sum()
    return w / len(forest._view.trees)


class TestJackknifePlus:
    @pytest.mark.parametrize("level", [0.5, 0.8, 0.9])
    def test_equals_the_loop(self, level):
        forest, X, y, X_new = small_forest()
        got = forest.intervals(X_new, level=level)
        lower, upper = jackknife_plus_loop(forest, X, y, X_new, level)
        np.testing.assert_allclose(got.lower, lower, rtol=0, atol=1e-6)  # single-precision products
        np.testing.assert_allclose(got.upper, upper, rtol=0, atol=1e-6)
        np.testing.assert_allclose(got.prediction, forest.predict(X_new))
        assert got.method == "jackknife+" and got.level == level and got.leaf_counts is None

    def test_infinite_beyond_the_cases(self):
        # ceil(0.97 * 26) = 26 > n = 25: the upper end is +inf, the lower floor(0.03 * 26) = 0: -inf
        forest, X, y, X_new = small_forest()
        got = forest.intervals(X_new, level=0.97)
        assert np.all(np.isinf(got.upper)) and np.all(np.isneginf(got.lower))
        assert got.covers(np.zeros(9)).all()

    def test_subsampled_forest(self):
        forest, X, y, X_new = small_forest(sample_size=12, replace=False)
        lower, upper = jackknife_plus_loop(forest, X, y, X_new, 0.8)
        got = forest.intervals(X_new, level=0.8)
        np.testing.assert_allclose(got.lower, lower, rtol=0, atol=1e-6)  # single-precision products
        np.testing.assert_allclose(got.upper, upper, rtol=0, atol=1e-6)


class TestQuantileForest:
    @pytest.mark.parametrize("counts", ["original", "bootstrap"])
    def test_equals_numpy_weighted_quantiles_of_the_loop_weights(self, counts):
        # NumPy's weighted "inverted_cdf" quantile is inf {y : F(y) >= p} of the weighted empirical distribution
        # (Hyndman & Fan 1996, definition 1), the quantile of Meinshausen (2006), eq. 7.
        forest, X, y, X_new = small_forest(seed=3)
        p = np.array([0.0, 0.05, 0.3, 0.5, 0.77, 1.0])
        got = forest.quantiles(X_new, p, leaf_counts=counts)
        w = quantile_forest_weights(forest, X, X_new, counts)
        for r in range(len(X_new)):
            want = np.quantile(y, p, weights=w[r], method="inverted_cdf")
            np.testing.assert_array_equal(got.values[r], want)
        assert got.leaf_counts == counts

    def test_bootstrap_weights_average_to_the_prediction(self):
        # with in-bag counts the weights are those that made every leaf's mean, so sum_i w_i y_i is the forest
        forest, X, y, X_new = small_forest(seed=4)
        w = quantile_forest_weights(forest, X, X_new, "bootstrap")
        np.testing.assert_allclose(w @ y, forest.predict(X_new), rtol=1e-10)
        np.testing.assert_allclose(forest.quantiles(X_new).prediction, forest.predict(X_new), rtol=1e-12)

    def test_one_leaf_trees_give_the_sample_quantiles(self):
        # a single leaf holds every case once: the weights are 1/n and the quantiles NumPy's of y
        rng = np.random.default_rng(5)
        X, y = rng.normal(size=(40, 2)), rng.exponential(size=40)
        forest = fl.Forest(trees=5, depth_limit=0, rng=1).fit(X, y)
        p = np.array([0.0, 0.1, 0.25, 0.3, 0.5, 0.77, 0.9, 1.0])   # k / n exactly gives y_(k), NumPy's too
        got = forest.quantiles(X[:2], p).values
        np.testing.assert_array_equal(got[0], np.quantile(y, p, method="inverted_cdf"))

    def test_case_weights_and_intervals_from_quantiles(self):
        forest, X, y, X_new = small_forest(seed=6)
        band = forest.intervals(X_new, level=0.8, method="quantile")
        q = forest.quantiles(X_new, [0.1, 0.9]).values
        np.testing.assert_array_equal(band.lower, q[:, 0])
        np.testing.assert_array_equal(band.upper, q[:, 1])
        assert band.leaf_counts == "original"
        weights = np.random.default_rng(1).uniform(0.5, 2, size=len(y))
        weighted = fl.Forest(trees=60, rng=2, min_leaf=3).fit(X, y, weights=weights)
        w = quantile_forest_weights(weighted, X, X_new, "original", weights)
        got = weighted.quantiles(X_new, [0.2, 0.5, 0.8]).values
        for r in range(len(X_new)):
            np.testing.assert_array_equal(got[r], np.quantile(y, [0.2, 0.5, 0.8], weights=w[r],
                                                              method="inverted_cdf"))


class TestMessages:
    def test_bad_input(self):
        forest, X, y, X_new = small_forest()
        with pytest.raises(ValueError, match="`level` must lie strictly between 0 and 1"):
            forest.intervals(X_new, level=1.0)
        with pytest.raises(TypeError, match="`level` must be a number"):
            forest.intervals(X_new, level="0.9")
        with pytest.raises(ValueError, match="`method` must be one of"):
            forest.intervals(X_new, method="conformal")
        with pytest.raises(ValueError, match="`leaf_counts` must be one of"):
            forest.quantiles(X_new, leaf_counts="inbag")
        with pytest.raises(ValueError, match=r"`probabilities` must be one or more numbers in \[0, 1\]"):
            forest.quantiles(X_new, [0.5, 1.5])
        labels = np.where(y > 0, "up", "down")
        with pytest.raises(TypeError, match="`intervals` is for regression forests"):
            fl.Forest(trees=20, rng=1).fit(X, labels).intervals(X_new)
        with pytest.raises(TypeError, match="quantile regression forests are for regression forests"):
            fl.Forest(trees=20, rng=1).fit(X, labels).quantiles(X_new)

    def test_case_never_out_of_bag(self):
        forest, X, y, X_new = small_forest(trees=2)
        with pytest.warns(fl.NeverOutOfBagWarning):
            with pytest.raises(ValueError, match="needs every training case out-of-bag"):
                forest.intervals(X_new)

    def test_print(self):
        forest, X, y, X_new = small_forest()
        text = str(forest.intervals(X_new, level=0.8))
        assert text.startswith("80% prediction intervals at 9 rows (jackknife+-after-bootstrap; 150 trees, 25 cases)")
        assert "lower" in text and "width" in text
        assert str(forest.quantiles(X_new[:2], [0.5])).splitlines()[1].split() == ["row", "p", "=", "0.5"]


def heteroscedastic(n, rng):
    """y = 2 x1 + x2 + sigma(x) e, sigma(x) = 0.2 + 2 x1, x uniform on [0, 1]^4, e standard normal."""
    X = rng.uniform(size=(n, 4))
    sigma = 0.2 + 2 * X[:, 0]
    return X, 2 * X[:, 0] + X[:, 1] + sigma * rng.normal(size=n), sigma


@pytest.fixture(scope="module")
def coverage_runs():
    """Four training sets of 1000 cases, each with 5000 fresh cases: coverage of both methods at 80/90/95%,
    overall and in the quartiles of sigma(x)."""
    levels = (0.8, 0.9, 0.95)
    found = {(m, level): [] for m in ("quantile", "jackknife+") for level in levels}
    for r in range(4):
        rng = np.random.default_rng(100 + r)
        (X, y, _), (X_new, y_new, sigma) = heteroscedastic(1000, rng), heteroscedastic(5000, rng)
        forest = fl.Forest(trees=300, rng=r).fit(X, y)
        bins = np.digitize(sigma, np.quantile(sigma, [0.25, 0.5, 0.75]))
        q = forest.quantiles(X_new, [0.025, 0.05, 0.1, 0.9, 0.95, 0.975]).values
        for j, level in enumerate(reversed(levels)):
            inside = {"quantile": (q[:, j] <= y_new) & (y_new <= q[:, 5 - j]),
                      "jackknife+": forest.intervals(X_new, level=level).covers(y_new)}
            for method, hit in inside.items():
                found[method, level].append([hit.mean()] + [hit[bins == b].mean() for b in range(4)])
    return {key: np.array(value) for key, value in found.items()}


@pytest.mark.slow
@pytest.mark.parametrize("method", ["quantile", "jackknife+"])
@pytest.mark.parametrize("level", [0.8, 0.9, 0.95])
def test_marginal_coverage_on_heteroscedastic_data(coverage_runs, method, level):
    # Coverage is a binomial proportion over the 4 x 5000 fresh cases, plus the spread between training sets:
    # allow 3 standard errors of the mean of the four runs, at least the binomial one. Measured: quantile
    # 0.801 / 0.899 / 0.947, jackknife+ 0.802 / 0.901 / 0.952 (run-to-run sd 0.004-0.010).
    runs = coverage_runs[method, level][:, 0]
    binomial = math.sqrt(level * (1 - level) / 20_000)
    error = max(binomial, runs.std(ddof=1) / 2)
    assert abs(runs.mean() - level) < 3 * error


@pytest.mark.slow
@pytest.mark.parametrize("level", [0.8, 0.9, 0.95])
def test_quantile_intervals_cover_within_bins_of_the_noise(coverage_runs, level):
    # Meinshausen (2006), Theorem 1: the quantile forest's conditional distribution is consistent, so its
    # intervals cover at every x in the limit; at n = 1000 they come within 0.08 of the level in every
    # quartile of sigma(x) (measured at 80%: 0.88, 0.79, 0.78, 0.76; at 90%: 0.95, 0.90, 0.89, 0.85), where
    # the jackknife+ intervals, of nearly constant width, are off by up to 0.22 (80%: 1.00, 0.90, 0.73, 0.58;
    # 90%: 1.00, 0.98, 0.88, 0.75): they cover on average only.
    quantile = coverage_runs["quantile", level][:, 1:].mean(axis=0)
    jackknife = coverage_runs["jackknife+", level][:, 1:].mean(axis=0)
    assert np.all(np.abs(quantile - level) < 0.1)
    assert np.max(np.abs(quantile - level)) < np.max(np.abs(jackknife - level)) / 2
    assert jackknife[-1] < level - 0.05 and jackknife[0] > level


def adversarial(kind, n, rng):
    X = rng.uniform(size=(n, 2))
    if kind == "heavy tails":                       # Cauchy noise: no variance at all
        return X, X[:, 0] + stats.cauchy.rvs(size=n, random_state=rng)
    if kind == "rare spikes":                       # one case in twenty is 50 units off
        return X, X[:, 0] + 50.0 * (rng.random(n) < 0.05) + 0.1 * rng.normal(size=n)
    X[:] = 0.5                                      # no predictor information: every tree is one leaf
    return X, rng.exponential(size=n)


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["heavy tails", "rare spikes", "constant predictors"])
def test_jackknife_plus_never_below_one_minus_twice_alpha_at_n_30(kind):
    """Kim, Xu & Barber (2020), Theorem 1: coverage >= 1 - 2 alpha for any distribution when the number of
    trees is Binomial(B', (1 - 1/(n + 1))^n); the test draws it so (B' = 150), n = 30, 150 training sets with
    40 new cases each, at alpha = 0.1 and 0.25. Measured at 90% / 75%: heavy tails 0.904 / 0.799, rare spikes
    0.918 / 0.803, constant predictors 0.908 / 0.787 (the guarantee: 0.8 / 0.5)."""
    rng = np.random.default_rng(7)
    hits = {0.9: [], 0.75: []}
    for r in range(150):
        X, y = adversarial(kind, 70, rng)
        trees = int(rng.binomial(150, (1 - 1 / 31) ** 30))
        forest = fl.Forest(trees=trees, rng=r).fit(X[:30], y[:30])
        for level in hits:
            hits[level].append(forest.intervals(X[30:], level=level).covers(y[30:]))
    for level, hit in hits.items():
        share = float(np.mean(hit))
        # one-sided binomial bound at the 0.001 level over the 6000 new cases
        assert share >= 1 - 2 * (1 - level) - 3.1 * math.sqrt(level * (1 - level) / 6000), (level, share)
        assert share > level - 0.05
