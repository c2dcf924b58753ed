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


def test_strict_refuses_where_a_threshold_had_to_move(tmp_path):
    """0.08 and 0.10 split at their midpoint, on which the training value 0.09 sits; 0.09 rounds up across it
    in float32 (IEEE 754 round to nearest, common practice), so no float32 threshold keeps both 0.09 and the
    float32 number fl(0.09) on forestlab's sides. The default moves the threshold; strict refuses."""
    onnx = pytest.importorskip("onnx")
    t = (0.08 + 0.10) / 2
    assert 0.09 <= t < float(np.float32(0.09))          # the case a strict export cannot express
    # 12 cases at 0.09 (class c) are split off first by x1, so the node holding 0.08 (a) and 0.10 (b) cuts at t
    X = np.column_stack([np.repeat([0.08, 0.10, 0.09], [10, 10, 12]), np.repeat([0.0, 0.0, 1.0], [10, 10, 12])])
    y = np.repeat(["a", "b", "c"], [10, 10, 12])
    forest = fl.Forest(trees=1, sampler=fl.AllFeatures(), replace=False, sample_size=1.0, rng=2).fit(X, y)
    tree = forest.tree(0)
    assert tree.feature[0] == 1 and tree.threshold[tree.feature == 0].tolist() == [t]
    with pytest.raises(ValueError, match=r"`strict=True`: 1 split threshold\(s\) cannot send every training value"):
        forest.to_onnx(tmp_path / "strict.onnx", strict=True)
    assert not (tmp_path / "strict.onnx").exists()
    with pytest.raises(TypeError, match="`strict` must be True or False"):
        forest.to_onnx(tmp_path / "strict.onnx", strict="yes")
    forest.to_onnx(tmp_path / "kept.onnx")
    metadata = {p.key: p.value for p in onnx.load(str(tmp_path / "kept.onnx")).metadata_props}
    assert "(1 of them" in metadata["thresholds"]   # the moved threshold is said in the metadata
