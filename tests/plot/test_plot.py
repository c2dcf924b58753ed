"""Pictures (forestlab.plot, optional extra `plot`): drawn off screen with Agg, checked by their data."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

import forestlab as fl  # noqa: E402
import forestlab.plot as flp  # noqa: E402


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


@pytest.fixture(scope="module")
def classifier():
    rng = np.random.default_rng(21)
    X = rng.normal(size=(120, 3))
    y = np.where(X[:, 0] + 0.3 * X[:, 1] > 0, "ok", "rework")
    return fl.Forest(trees=30, rng=22).fit(X, y), X, y


def test_package_import_does_not_import_matplotlib():
    code = "import sys, forestlab; assert 'matplotlib' not in sys.modules, 'matplotlib imported'"
    subprocess.run([sys.executable, "-c", code], check=True)


class TestErrorCurve:
    def test_lines(self):
        curve = np.linspace(0.4, 0.1, 50)
        by_class = np.column_stack([curve + 0.05, curve - 0.05])
        ax = flp.error_curve(curve, by_class, classes=["ok", "rework"])
        lines = ax.get_lines()
        assert len(lines) == 3
        assert np.array_equal(lines[-1].get_xdata(), np.arange(1, 51))
        assert np.array_equal(lines[-1].get_ydata(), curve)
        assert np.array_equal(lines[0].get_ydata(), by_class[:, 0])
        assert [t.get_text() for t in ax.get_legend().get_texts()] == ["class ok", "class rework", "all cases"]

    def test_messages(self):
        with pytest.raises(ValueError, match=r"`by_class` must have shape \(trees, K\) = \(5, K\)"):
            flp.error_curve(np.ones(5), np.ones((4, 2)))
        with pytest.raises(ValueError, match="`curve` must be a non-empty 1-D array"):
            flp.error_curve(np.ones((2, 2)))
        with pytest.raises(TypeError, match="`ax` must be a matplotlib Axes"):
            flp.error_curve(np.ones(5), ax="left")


class TestMargins:
    def test_histogram_and_marks(self):
        values = np.array([-0.8, -0.2, 0.1, 0.5, 0.55, 0.9, np.nan])
        ax = flp.margins(values, np.array([0, 1]), bins=4)
        heights = [patch.get_height() for patch in ax.patches]
        assert heights == [1, 1, 1, 3]
        marks = ax.get_lines()[-1]
        assert np.array_equal(marks.get_xdata(), [-0.8, -0.2])
        assert np.array_equal(flp.margins(values, threshold=0.2).get_lines()[-1].get_xdata(), [-0.8, -0.2, 0.1])

    def test_messages(self):
        with pytest.raises(ValueError, match="`doubtful` must hold int case indices below 3"):
            flp.margins(np.zeros(3), [5])
        with pytest.raises(ValueError, match="`bins` must be a positive int"):
            flp.margins(np.zeros(3), bins=0)


class TestImportanceBars:
    def test_bars(self, classifier):
        forest, _, _ = classifier
        result = forest.importance(rng=1, names=["a", "b", "c"])
        ax = flp.importance(result)
        widths = [patch.get_width() for patch in ax.patches]
        assert np.allclose(widths, result.scores[result.ranking[::-1]])
        assert [t.get_text() for t in ax.get_yticklabels()] == [result.names[k] for k in result.ranking[::-1]]
        assert len(flp.importance(result, top=2).patches) == 2

    def test_messages(self):
        with pytest.raises(TypeError, match="`result` must be an Importance"):
            flp.importance(np.ones(3))


class TestPartialDependencePlot:
    def test_curve_with_ice(self, classifier):
        forest, _, _ = classifier
        result = forest.partial_dependence(0, ice=True, points=10)
        ax = flp.partial_dependence(result, curves=5, name="temperature")
        lines = ax.get_lines()
        assert len(lines) == 6
        assert np.array_equal(lines[-1].get_xdata(), result.grid[0])
        assert np.array_equal(lines[-1].get_ydata(), result.average)
        assert np.array_equal(lines[0].get_ydata(), result.ice[0])
        assert "'rework'" in ax.get_ylabel() and ax.get_xlabel() == "temperature"

    def test_surface(self, classifier):
        forest, _, _ = classifier
        result = forest.partial_dependence((0, 1), points=5)
        ax = flp.partial_dependence(result)
        assert ax.get_xlabel() == "x0" and ax.get_ylabel() == "x1"
        assert len(ax.figure.axes) == 2  # the surface and its colour bar

    def test_messages(self, classifier):
        forest, _, _ = classifier
        with pytest.raises(ValueError, match="`name` must give 1 name"):
            flp.partial_dependence(forest.partial_dependence(0, points=3), name=["a", "b"])


class TestProximityMapPlot:
    def test_points_by_class_and_rings(self, classifier):
        forest, _, y = classifier
        layout = forest.proximity_map(oob=False)
        ring = np.array([3, 7])
        ax = flp.proximity_map(layout, y, outliers=ring)
        groups = ax.collections
        assert len(groups) == 3
        assert np.allclose(groups[0].get_offsets(), layout.coordinates[y == "ok"])
        assert np.allclose(groups[1].get_offsets(), layout.coordinates[y == "rework"])
        assert np.allclose(groups[2].get_offsets(), layout.coordinates[ring])
        assert [t.get_text() for t in ax.texts] == ["3", "7"]

    def test_messages(self):
        with pytest.raises(ValueError, match=r"`labels` must have one entry per case \(4\)"):
            flp.proximity_map(np.zeros((4, 2)), labels=[1, 2])
        with pytest.raises(ValueError, match="`outliers` must hold int case indices below 4"):
            flp.proximity_map(np.zeros((4, 2)), outliers=[4])
        with pytest.raises(ValueError, match=r"\(n, 2\+\) coordinates"):
            flp.proximity_map(np.zeros(4))
