"""The float32 threshold rule, the refusals, and the clear errors of ``Forest.to_onnx``."""

from __future__ import annotations

import sys

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import forestlab as fl
from forestlab.export.thresholds import float32_thresholds

FLOAT32 = st.floats(width=32, allow_nan=False)


@given(st.floats(allow_nan=False, allow_infinity=False), st.lists(FLOAT32, min_size=1, max_size=20))
def test_every_float32_number_goes_as_the_float64_rule(t, others):
    """IEEE 754 (common practice): between two neighbouring float32 numbers there is no other float32, so the
    largest float32 not above t sends every float32 v the way v <= t does."""
    t = np.float64(t)  # a NumPy scalar, so that comparisons with float32 happen in float64
    t32 = float32_thresholds(np.array([t]))[0]
    with np.errstate(under="ignore", over="ignore"):  # float32's subnormal numbers and its range
        up, down, nearest = np.nextafter(t32, np.float32(np.inf)), np.nextafter(t32, np.float32(-np.inf)), np.float32(t)
    assert t32 <= t < up
    near = np.array([t32, up, down, nearest, *others], np.float32)
    np.testing.assert_array_equal(near <= t32, near.astype(np.float64) <= t)


def test_round_to_nearest_would_not_do():
    """A check of the check: the nearest float32 of 0.1 is above it, so 0.1f would go left under 0.1f."""
    t = np.float64(0.1)
    assert np.float32(t) > t and float32_thresholds(np.array([t]))[0] < t


@pytest.fixture(scope="module")
def forest():
    rng = np.random.default_rng(0)
    X = rng.integers(0, 50, size=(200, 3)).astype(np.float64)
    return fl.Forest(trees=5, rng=1).fit(X, np.where(X[:, 0] > 20, "high", "low"))


def test_training_values_float32_cannot_separate_are_refused(tmp_path):
    pytest.importorskip("onnx")
    X = np.repeat([[1.0, 0.0], [1.0 + 2.0**-30, 0.0]], 10, axis=0)
    y = np.repeat(["a", "b"], 10)
    forest = fl.Forest(trees=3, sampler=fl.AllFeatures(), rng=2).fit(X, y)
    assert forest.tree(0).feature[0] == 0
    with pytest.raises(ValueError, match=r"feature 'x0' cannot be exported exactly in float32.*same number"):
        forest.to_onnx(tmp_path / "forest.onnx")
    assert not (tmp_path / "forest.onnx").exists()


def test_category_values_that_are_not_float32_numbers_are_refused(tmp_path):
    pytest.importorskip("onnx")
    rng = np.random.default_rng(3)
    X = np.column_stack([rng.choice([0.1, 0.2, 0.3], 60), rng.normal(size=60)])
    forest = fl.Forest(trees=3, categorical=[0], rng=4).fit(X, X[:, 0] > 0.15)
    with pytest.raises(ValueError, match=r"categorical feature 'x0' has the category value 0.1"):
        forest.to_onnx(tmp_path / "forest.onnx")


def test_clear_errors(forest, tmp_path, monkeypatch):
    with pytest.raises(RuntimeError, match="not fitted"):
        fl.Forest().to_onnx(tmp_path / "forest.onnx")
    with pytest.raises(FileNotFoundError, match=r"`path` .* is in a folder that does not exist"):
        forest.to_onnx(tmp_path / "missing" / "forest.onnx")
    with pytest.raises(IsADirectoryError, match="is a folder"):
        forest.to_onnx(tmp_path)
    with pytest.raises(TypeError, match="`path` must be a str or os.PathLike"):
        forest.to_onnx(3)
    monkeypatch.setitem(sys.modules, "onnx", None)
    with pytest.raises(ImportError, match=r"pip install 'forestlab\[onnx\]'"):
        forest.to_onnx(tmp_path / "forest.onnx")
