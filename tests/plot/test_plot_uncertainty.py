"""Pictures of intervals and of a coverage check (forestlab.plot), drawn off screen, checked by their data."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("matplotlib")     # off screen, figures closed after each test: tests/plot/conftest.py

import forestlab as fl  # noqa: E402
import forestlab.plot as flp  # noqa: E402


@pytest.fixture(scope="module")
def regression():
    rng = np.random.default_rng(3)
    X = rng.uniform(size=(200, 2))
    y = 3 * X[:, 0] + (0.1 + X[:, 1]) * rng.normal(size=200)
    X_new = rng.uniform(size=(40, 2))
    y_new = 3 * X_new[:, 0] + (0.1 + X_new[:, 1]) * rng.normal(size=40)
    return fl.Forest(trees=60, rng=4).fit(X, y), X_new, y_new


def test_intervals_along_a_feature(regression):
    forest, X_new, y_new = regression
    band = forest.intervals(X_new, level=0.8, method="quantile")
    ax = flp.intervals(band, X_new[:, 0], observed=y_new, name="dose")
    order = np.argsort(X_new[:, 0], kind="stable")
    prediction, inside, outside = ax.get_lines()
    np.testing.assert_array_equal(prediction.get_xdata(), X_new[order, 0])
    np.testing.assert_array_equal(prediction.get_ydata(), band.prediction[order])
    hits = band.covers(y_new)
    np.testing.assert_array_equal(inside.get_ydata(), y_new[hits])
    np.testing.assert_array_equal(outside.get_ydata(), y_new[~hits])
    assert ax.get_xlabel() == "dose"
    assert f"observed, inside ({hits.mean():.0%})" in [t.get_text() for t in ax.get_legend().get_texts()]


def test_intervals_against_the_prediction(regression):
    forest, X_new, _ = regression
    band = forest.intervals(X_new, level=0.9)
    ax = flp.intervals(band)
    bars = ax.collections[0].get_segments()
    order = np.argsort(band.prediction, kind="stable")
    np.testing.assert_allclose([segment[:, 1] for segment in bars], np.column_stack([band.lower, band.upper])[order])
    assert ax.get_xlabel() == "prediction"


def test_coverage_check(regression):
    forest, X_new, y_new = regression
    levels = (0.5, 0.8, 0.9)
    results = [forest.intervals(X_new, level=level) for level in levels]
    ax = flp.coverage(results, y_new)
    diagonal, observed = ax.get_lines()
    np.testing.assert_array_equal(observed.get_xdata(), levels)
    np.testing.assert_allclose(observed.get_ydata(), [r.covers(y_new).mean() for r in results])
    assert "95% binomial band (40 cases)" in [t.get_text() for t in ax.get_legend().get_texts()]
    labels = np.where(y_new > 1.5, "high", "low")
    classifier = fl.Forest(trees=40, rng=1).fit(X_new, labels)
    sets = [classifier.prediction_sets(X_new, level=level, rng=1) for level in levels]
    assert len(flp.coverage(sets, labels).get_lines()) == 2


def test_messages(regression):
    forest, X_new, y_new = regression
    band = forest.intervals(X_new)
    with pytest.raises(TypeError, match="`result` must be PredictionIntervals"):
        flp.intervals(np.zeros(3))
    with pytest.raises(ValueError, match=r"`along` must hold one value per row \(40\)"):
        flp.intervals(band, np.zeros(3))
    with pytest.raises(ValueError, match=r"`observed` must hold one value per row \(40\)"):
        flp.intervals(band, observed=np.zeros(3))
    with pytest.raises(TypeError, match="`results` must be a non-empty sequence"):
        flp.coverage([], y_new)
