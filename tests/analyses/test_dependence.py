"""Partial dependence and ICE curves (forestlab.analyses.dependence)."""

from __future__ import annotations

import numpy as np
import pytest

import forestlab as fl
from forestlab.synthetic import friedman1


@pytest.fixture(scope="module")
def regression():
    X, y = friedman1(200, rng=4)
    return fl.Forest(trees=20, rng=5).fit(X, y), X


@pytest.fixture(scope="module")
def three_classes():
    rng = np.random.default_rng(6)
    X = rng.normal(size=(150, 3))
    y = np.digitize(X[:, 0] + 0.5 * X[:, 1], [-0.5, 0.5])
    return fl.Forest(trees=15, rng=7).fit(X, y), X


class TestPartialDependenceValidation:
    def test_messages(self, regression, three_classes):
        forest, X = regression
        with pytest.raises(ValueError, match="`feature` = 10 is out of range for 10 features"):
            forest.partial_dependence(10)
        with pytest.raises(TypeError, match="`feature` must be a column name or int index"):
            forest.partial_dependence(1.5)
        with pytest.raises(ValueError, match="`feature` names an unknown column 'speed'; known: \\['x0', 'x1'"):
            forest.partial_dependence("speed")
        np.testing.assert_array_equal(forest.partial_dependence("x3", points=5).average,
                                      forest.partial_dependence(3, points=5).average)
        with pytest.raises(ValueError, match="one column or a pair"):
            forest.partial_dependence((0, 1, 2))
        with pytest.raises(ValueError, match="two different columns"):
            forest.partial_dependence((1, 1))
        with pytest.raises(ValueError, match="`ice` curves are drawn for one feature"):
            forest.partial_dependence((0, 1), ice=True)
        with pytest.raises(ValueError, match="`grid` values must be a non-empty 1-D array"):
            forest.partial_dependence(0, grid=[0.1, np.nan])
        with pytest.raises(ValueError, match=r"`grid` must hold one array per feature \(2\)"):
            forest.partial_dependence((0, 1), grid=[[0.5]])
        with pytest.raises(ValueError, match="`points` must be an int of at least 2"):
            forest.partial_dependence(0, points=1)
        with pytest.raises(ValueError, match="`label` is for classification forests"):
            forest.partial_dependence(0, label=1)
        with pytest.raises(ValueError, match="`X` must have 10 features"):
            forest.partial_dependence(0, X=X[:, :3])
        classifier, _ = three_classes
        with pytest.raises(ValueError, match=r"`label` must name the class .* one of \[0, 1, 2\]"):
            classifier.partial_dependence(0)
        with pytest.raises(ValueError, match=r"`label` must be one of \[0, 1, 2\]; got 7"):
            classifier.partial_dependence(0, label=7)


class TestPartialDependence:
    def test_equals_brute_force_average(self, regression):
        # Friedman (2001), "Greedy function approximation", Ann. Statist. 29, section 8.2: the average of
        # the prediction over the data with the feature held at each grid value.
        forest, X = regression
        grid = np.array([0.1, 0.35, 0.8])
        result = forest.partial_dependence(2, grid, ice=True)
        for g, value in enumerate(grid):
            held = X.copy()
            held[:, 2] = value
            assert result.average[g] == pytest.approx(forest.predict(held).mean(), rel=1e-12)
            assert np.allclose(result.ice[:, g], forest.predict(held))
        assert np.allclose(result.ice.mean(axis=0), result.average)

    def test_vote_share_and_surface(self, three_classes):
        forest, X = three_classes
        result = forest.partial_dependence((0, 2), grid=[[-1.0, 0.0, 1.0], None], label=2, points=4)
        assert result.average.shape == (3, 4) and result.label == 2
        held = X.copy()
        held[:, 0], held[:, 2] = 1.0, result.grid[1][3]
        assert result.average[2, 3] == pytest.approx(forest.votes(held)[:, 2].mean(), rel=1e-12)
        assert np.all(np.diff(result.grid[1]) > 0)

    def test_default_grid(self, regression):
        forest, X = regression
        result = forest.partial_dependence(0, points=5)
        assert np.allclose(result.grid[0], np.quantile(X[:, 0], [0, 0.25, 0.5, 0.75, 1]))
        binary = np.column_stack([X[:, :9], (X[:, 9] > 0.5).astype(float)])
        assert forest.partial_dependence(9, X=binary).grid[0].tolist() == [0.0, 1.0]

    def test_missing_values_stay_out_of_the_grid(self, regression):
        forest, X = regression
        gappy = X.copy()
        gappy[::3, 1] = np.nan
        result = forest.partial_dependence(1, X=gappy, points=4)
        present = np.delete(X[:, 1], np.arange(0, X.shape[0], 3))
        assert np.allclose(result.grid[0], np.quantile(present, [0, 1 / 3, 2 / 3, 1]))
        gappy[:, 1] = np.nan
        with pytest.raises(ValueError, match="missing \\(NaN\\) in every case; pass `grid`"):
            forest.partial_dependence(1, X=gappy)

    def test_categorical_feature_uses_its_categories(self):
        # The grid of a categorical feature is its category labels; holding the feature at a label means the
        # same as predicting on data with that label (brute force through Forest.predict).
        rng = np.random.default_rng(3)
        X = np.column_stack([rng.choice([10.0, 20.0, 30.0, 40.0], 200), rng.normal(size=200)])
        y = np.where(np.isin(X[:, 0], [20.0, 40.0]), 3.0, 0.0) + X[:, 1]
        forest = fl.Forest(trees=20, categorical=[0], rng=4).fit(X, y)
        result = forest.partial_dependence(0)
        assert result.grid[0].tolist() == [10.0, 20.0, 30.0, 40.0]
        for g, value in enumerate(result.grid[0]):
            held = X.copy()
            held[:, 0] = value
            assert result.average[g] == pytest.approx(forest.predict(held).mean(), rel=1e-12)
        assert result.average[1] - result.average[0] > 2.0
        with pytest.raises(ValueError, match=r"`grid` value\(s\) \[25.0\] are not categories of feature 0"):
            forest.partial_dependence(0, grid=[10.0, 25.0])
        assert forest.importance(rng=1).ranking[0] == 0

    def test_two_class_default_label(self):
        rng = np.random.default_rng(1)
        X = rng.normal(size=(100, 2))
        y = np.where(X[:, 0] > 0, "rework", "pass")
        forest = fl.Forest(trees=10, rng=2).fit(X, y)
        result = forest.partial_dependence(0, grid=[-2.0, 2.0])
        assert result.label == "rework" and isinstance(result.label, str)
        assert result.average[1] > result.average[0]

    @pytest.mark.slow
    def test_friedman1_linear_terms(self):
        # Friedman (1991), Ann. Statist. 19: y = 10 sin(pi x1 x2) + 20 (x3 - 1/2)^2 + 10 x4 + 5 x5 + e with
        # independent U[0, 1] inputs, so the exact partial dependence on x4 (column 3) is a line of slope 10
        # and on x5 (column 4) a line of slope 5. A forest's averaging shrinks the slopes (common practice);
        # over the central range 0.1..0.9, bagged trees on 1000 cases measured 9.8 and 3.9. Tolerances:
        # slope 10 within [8, 11.5], slope 5 within [3.5, 6]; the curve is close to a line (R^2 > 0.95;
        # measured 0.99 and 0.98).
        X, y = friedman1(1000, rng=1)
        forest = fl.Forest(trees=150, sampler=fl.AllFeatures(), rng=2).fit(X, y)
        grid = np.linspace(0.1, 0.9, 17)
        for column, low, high in [(3, 8.0, 11.5), (4, 3.5, 6.0)]:
            curve = forest.partial_dependence(column, grid).average
            slope, intercept = np.polyfit(grid, curve, 1)
            residual = curve - (slope * grid + intercept)
            assert low < slope < high
            assert 1 - residual.var() / curve.var() > 0.95
