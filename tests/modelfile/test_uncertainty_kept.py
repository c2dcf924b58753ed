"""Model files keep what variance, intervals, quantiles, prediction sets and doubtful labels need (format
version 2: the leaf of every training case of a regression forest); version 1 files still load."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import forestlab as fl
from forestlab.modelfile.container import FORMAT_VERSION, read_model, write_model
from test_version1 import version1_layout


def _fit(task, seed=0, n=120, trees=150):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    score = X[:, 0] + 0.4 * rng.normal(size=n)
    y = np.where(score > 0, "yes", "no") if task == "classification" else score
    weights = rng.uniform(0.5, 2.0, n) if task == "regression" else None
    return fl.Forest(trees=trees, rng=seed).fit(X, y, weights=weights), X, y, rng.normal(size=(20, 3))


def _variance(forest, X):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", fl.FewTreesWarning)     # 150 trees for 120 cases: noisy, but equal
        return forest.variance(X)


def _same(a, b):
    for name in ("lower", "upper", "prediction", "estimate", "values", "members", "thresholds", "p_value", "case"):
        if hasattr(a, name):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)


def test_format_version_is_two():
    assert FORMAT_VERSION == 2


@pytest.fixture(scope="module")
def regression(tmp_path_factory):
    """A regression forest, and it loaded back from files written without and with its data."""
    folder = tmp_path_factory.mktemp("files")
    forest, X, y, X_new = _fit("regression")
    loaded = {}
    for include_data in (False, True):
        forest.save(folder / f"{include_data}.npz", include_data=include_data)
        loaded[include_data] = fl.load(folder / f"{include_data}.npz")
    return forest, loaded, X_new


@pytest.mark.parametrize("include_data", [False, True])
def test_regression_forest_without_data_gives_the_same_answers(regression, include_data):
    forest, loaded, X_new = regression
    loaded = loaded[include_data]
    assert loaded._view.has_data == include_data
    _same(_variance(forest, X_new), _variance(loaded, X_new))
    _same(forest.intervals(X_new), loaded.intervals(X_new))
    for counts in ("original", "bootstrap"):
        _same(forest.quantiles(X_new, [0.1, 0.5], leaf_counts=counts),
              loaded.quantiles(X_new, [0.1, 0.5], leaf_counts=counts))
    _same(forest.oob.doubtful(fdr=0.3, trusted=np.arange(60)), loaded.oob.doubtful(fdr=0.3, trusted=np.arange(60)))


def test_case_leaves_are_compact_and_only_where_needed(regression, tmp_path):
    forest, *_ = regression
    forest.save(tmp_path / "m.npz")
    header, arrays = read_model(tmp_path / "m.npz")
    assert header["case_leaves"] == "<u2" and arrays["case_leaves"].dtype == np.uint16
    assert arrays["case_leaves"].shape == (150, 120)          # two bytes per tree and case
    forest.save(tmp_path / "d.npz", include_data=True)         # with the data the leaves follow from X
    header, arrays = read_model(tmp_path / "d.npz")
    assert header["case_leaves"] is None and "case_leaves" not in arrays
    labels, *_ = _fit("classification", trees=20)
    labels.save(tmp_path / "c.npz")
    assert read_model(tmp_path / "c.npz")[0]["case_leaves"] is None


def test_classification_forest_without_data_gives_the_same_answers(tmp_path):
    forest, X, y, X_new = _fit("classification")
    forest.save(tmp_path / "m.npz")
    loaded = fl.load(tmp_path / "m.npz")
    _same(_variance(forest, X_new), _variance(loaded, X_new))
    _same(forest.prediction_sets(X_new, by_class=True, rng=1), loaded.prediction_sets(X_new, by_class=True, rng=1))
    trusted = np.arange(0, 120, 2)
    _same(forest.oob.doubtful(fdr=0.3, trusted=trusted), loaded.oob.doubtful(fdr=0.3, trusted=trusted))


def test_a_saved_again_loaded_forest_keeps_its_leaves(tmp_path):
    forest, X, y, X_new = _fit("regression", trees=30)
    forest.save(tmp_path / "a.npz")
    fl.load(tmp_path / "a.npz").save(tmp_path / "b.npz")
    _same(forest.quantiles(X_new), fl.load(tmp_path / "b.npz").quantiles(X_new))


def _as_version_1(tmp_path, forest):
    """The forest's file as forestlab wrote it at format version 1 (no case_leaves, class weights)."""
    forest.save(tmp_path / "new.npz")
    write_model(tmp_path / "old.npz", *version1_layout(*read_model(tmp_path / "new.npz")))
    return fl.load(tmp_path / "old.npz")


def test_version_1_files_still_load(regression, tmp_path):
    forest, _, X_new = regression
    old = _as_version_1(tmp_path, forest)
    np.testing.assert_array_equal(old.predict(X_new), forest.predict(X_new))
    _same(forest.intervals(X_new), old.intervals(X_new))
    _same(_variance(forest, X_new), _variance(old, X_new))
    with pytest.raises(RuntimeError, match="quantiles need the leaf of every training case.*format version 1"):
        old.quantiles(X_new)


@pytest.mark.parametrize("damage, message", [
    ("leaf", "a training case's leaf number lies beyond its tree's leaves"),
    ("dtype", r"the header's case_leaves must be one of \('<u2', '<u4'\)"),
    ("field", "the header lacks the field 'case_leaves'"),
])
def test_damaged_case_leaves_are_refused(tmp_path, damage, message):
    forest, *_ = _fit("regression", trees=20)
    forest.save(tmp_path / "m.npz")
    header, arrays = read_model(tmp_path / "m.npz")
    if damage == "leaf":
        arrays["case_leaves"][3, 7] = forest.tree(3).leaves
    elif damage == "dtype":
        header["case_leaves"] = "<i8"
    else:
        del header["case_leaves"]
    write_model(tmp_path / "bad.npz", header, arrays)
    with pytest.raises(fl.ModelFileError, match=message):
        fl.load(tmp_path / "bad.npz")
