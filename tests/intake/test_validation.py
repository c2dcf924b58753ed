"""Bad input to the Forest gets a clear error naming the argument; legal edge cases behave as documented.

Rule under test (forestlab's own contract, RULES.md): every bad input raises ValueError/TypeError naming the
argument in backticks and stating the rule, before any work; never a deep NumPy traceback. Label handling
follows common practice: classes are the sorted distinct labels and index the vote columns.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import example, given
from hypothesis import strategies as st

import forestlab as fl


@pytest.fixture
def data():
    rng = np.random.default_rng(20)
    X = rng.normal(size=(40, 3))
    y = (X[:, 0] + 0.5 * X[:, 1] > 0).astype(np.int64)
    return X, y


@pytest.fixture
def fitted(data):
    X, y = data
    return fl.Forest(trees=4, rng=0).fit(X, y)


@pytest.fixture
def regression(data):
    X, _ = data
    return fl.Forest(trees=4, rng=0).fit(X, X[:, 0] * 2.0)


class TestForest:
    """The constructor validates every setting before any data is seen."""

    @pytest.mark.parametrize("kwargs, error, match", [
        ({"trees": 0}, ValueError, r"`trees` must be at least 1; got 0"),
        ({"trees": -3}, ValueError, r"`trees` must be at least 1"),
        ({"trees": 2.5}, TypeError, r"`trees` must be an int; got float"),
        ({"trees": True}, TypeError, r"`trees` must be an int; got bool"),
        ({"trees": "5"}, TypeError, r"`trees` must be an int; got str"),
        ({"sampler": "cube"}, ValueError, r"`sampler` must be one of \['log2', 'sqrt'\]"),
        ({"sampler": 0}, ValueError, r"`sampler` must be at least 1 when an int; got 0"),
        ({"sampler": 1.5}, ValueError, r"`sampler` must lie in \(0, 1\] when a fraction; got 1.5"),
        ({"sampler": 0.0}, ValueError, r"`sampler` must lie in \(0, 1\] when a fraction"),
        ({"sampler": True}, TypeError, r"`sampler` must be a CandidateSampler .*; got bool"),
        ({"sampler": [2]}, TypeError, r"`sampler` must be a CandidateSampler .*; got list"),
        ({"sampler": fl.AllFeatures}, TypeError, r"`sampler` must be a sampler instance such as AllFeatures\(\)"),
        ({"splitter": "gain"}, ValueError,
         r"`splitter` must be one of \['entropy', 'gini', 'squared_error'\] or a CartSplitter; got 'gain'"),
        ({"splitter": 3}, TypeError, r"`splitter` must be a CartSplitter or one of .*; got int"),
        ({"splitter": fl.GiniSplitter}, TypeError, r"`splitter` must be a splitter instance such as GiniSplitter"),
        ({"min_leaf": 0}, ValueError, r"`min_leaf` must be a positive finite number; got 0"),
        ({"min_leaf": -1.0}, ValueError, r"`min_leaf` must be a positive finite number"),
        ({"min_leaf": np.inf}, ValueError, r"`min_leaf` must be a positive finite number; got inf"),
        ({"min_leaf": np.nan}, ValueError, r"`min_leaf` must be a positive finite number; got nan"),
        ({"min_leaf": "1"}, TypeError, r"`min_leaf` must be a positive number; got str"),
        ({"min_leaf": True}, TypeError, r"`min_leaf` must be a positive number; got bool"),
        ({"depth_limit": -1}, ValueError, r"`depth_limit` must be at least 0; got -1"),
        ({"depth_limit": 2.0}, TypeError, r"`depth_limit` must be an int; got float"),
        ({"sample_size": 0}, ValueError, r"`sample_size` must be at least 1; got 0"),
        ({"sample_size": 0.0}, ValueError, r"`sample_size` must lie in \(0, 1\] when a fraction"),
        ({"sample_size": 1.5}, ValueError, r"`sample_size` must lie in \(0, 1\] when a fraction; got 1.5"),
        ({"sample_size": np.nan}, ValueError, r"`sample_size` must lie in \(0, 1\]"),
        ({"sample_size": "all"}, TypeError, r"`sample_size` must be an int, a fraction in \(0, 1\] or None"),
        ({"sample_size": True}, TypeError, r"`sample_size` .* got a bool"),
        ({"replace": 1}, TypeError, r"`replace` must be a bool; got int"),
        ({"replace": "yes"}, TypeError, r"`replace` must be a bool; got str"),
        ({"rng": -1}, ValueError, r"`rng` must be non-negative when an int; got -1"),
        ({"rng": 1.5}, TypeError, r"`rng` must be None, a non-negative int, a numpy SeedSequence or a numpy "
                                  r"Generator; got float"),
        ({"rng": "seed"}, TypeError, r"`rng` must be None, .*; got str"),
        ({"rng": True}, TypeError, r"`rng` must be None, .*; got bool"),
        ({"rng": np.random.RandomState(0)}, TypeError, r"`rng` must be None, .*; got RandomState"),
        ({"task": "cls"}, ValueError, r"`task` must be one of \['classification', 'regression'\] or None; got 'cls'"),
        ({"task": 1}, ValueError, r"`task` must be one of .* or None; got 1"),
        ({"workers": 0}, ValueError, r"`workers` must be at least 1; got 0"),
        ({"workers": 1.0}, TypeError, r"`workers` must be an int; got float"),
        ({"splitter": "gini", "task": "regression"}, ValueError,
         r"`splitter` GiniSplitter\(\) is for classification, but `task` is 'regression'"),
        ({"splitter": fl.SquaredErrorSplitter(), "task": "classification"}, ValueError,
         r"`splitter` SquaredErrorSplitter\(\) is for regression, but `task` is 'classification'"),
    ])
    def test_forest_iv(self, kwargs, error, match):
        with pytest.raises(error, match=match):
            fl.Forest(**kwargs)

    def test_trees_is_positional_and_the_rest_keyword_only(self):
        assert fl.Forest(7).trees == 7
        with pytest.raises(TypeError):
            fl.Forest(7, None)

    def test_legal_settings_are_accepted(self):
        for kwargs in [{"sampler": "sqrt"}, {"sampler": "log2"}, {"sampler": 3}, {"sampler": 0.5},
                       {"splitter": "entropy"}, {"splitter": "squared_error", "task": "regression"},
                       {"min_leaf": 2.5}, {"depth_limit": 0}, {"sample_size": 10}, {"sample_size": 0.5},
                       {"replace": False}, {"replace": np.bool_(True)}, {"rng": 0},
                       {"rng": np.random.SeedSequence(1)}, {"rng": np.random.default_rng(2)}]:
            fl.Forest(trees=2, **kwargs)

    def test_repr_shows_only_non_defaults(self):
        assert repr(fl.Forest()) == "Forest()"
        assert repr(fl.Forest(trees=20, min_leaf=3)) == "Forest(trees=20, min_leaf=3.0)"


class TestFit:
    """``fit`` validates X and y and encodes labels; a single class is legal with a warning."""

    @pytest.mark.parametrize("make, error, match", [
        (lambda X, y: (np.where(X > 1.5, -np.inf, X), y), ValueError,
         r"`X` holds \d+ infinite value\(s\), first at row \d+, column \d+; predictors must be finite"),
        (lambda X, y: (X, np.where(X[:, 0] > 1.5, np.nan, X[:, 0])), ValueError,
         r"`y` holds \d+ NaN or infinite value\(s\), first at row \d+"),
        (lambda X, y: (X, np.where(X[:, 0] > 1.5, np.inf, X[:, 0])), ValueError, r"`y` holds \d+ NaN or infinite"),
        (lambda X, y: (X, np.array([1, None] * 20, dtype=object)), ValueError,
         r"`y` holds 20 missing label\(s\), first at row 1"),
        (lambda X, y: (X, y[:-1]), ValueError, r"`y` has 39 values but `X` has 40 rows"),
        (lambda X, y: (X[:, 0], y), ValueError, r"`X` must be 2-D \(cases x features\); got 1-D with shape \(40,\)"),
        (lambda X, y: (X[None], y), ValueError, r"`X` must be 2-D .* got 3-D"),
        (lambda X, y: (X, y.reshape(4, 10)), ValueError, r"`y` must be 1-D with one target per case; got shape"),
        (lambda X, y: (X[:0], y[:0]), ValueError, r"`X` is empty: shape \(0, 3\)"),
        (lambda X, y: (X[:, :0], y), ValueError, r"`X` is empty: shape \(40, 0\)"),
        (lambda X, y: (X[:1], y[:1]), ValueError, r"`X` must have at least 2 rows to grow a tree; got 1"),
        (lambda X, y: (X.astype(str), y), TypeError, r"`X` must hold real numbers; got dtype <U"),
        (lambda X, y: (X.astype(object), y), TypeError, r"`X` must hold real numbers; got dtype object"),
        (lambda X, y: (X.astype(complex), y), TypeError, r"`X` must hold real numbers; got dtype complex128"),
        (lambda X, y: ([[1.0, 2.0], [3.0]], [0, 1]), TypeError, r"`X` could not be read as an array"),
        (lambda X, y: (X, np.array([1, "a"] * 20, dtype=object)), TypeError,
         r"`y` labels must be mutually comparable"),
    ])
    def test_fit_iv(self, data, make, error, match):
        X, y = make(*data)
        with pytest.raises(error, match=match):
            fl.Forest(trees=2, rng=0).fit(X, y)

    def test_fit_iv_settings_that_need_the_data(self, data):
        X, y = data
        with pytest.raises(ValueError, match=r"`sample_size` = 41 exceeds the 40 cases available without replacement"):
            fl.Forest(trees=2, sample_size=41, replace=False).fit(X, y)
        with pytest.raises(ValueError, match=r"`sample_size` = 20000 draws from 40 cases put more than 255 copies"):
            fl.Forest(trees=2, sample_size=20000, rng=0).fit(X, y)
        with pytest.raises(TypeError, match=r"`y` must be numeric for regression; got dtype <U"):
            fl.Forest(trees=2, task="regression").fit(X, np.where(y > 0, "a", "b"))
        with pytest.raises(ValueError, match=r"`y` holds \d+ NaN or infinite label\(s\)"):
            fl.Forest(trees=2, task="classification").fit(X, np.where(y > 0, np.nan, 1.0))

    def test_fit_returns_the_forest(self, data):
        forest = fl.Forest(trees=2, rng=0)
        assert forest.fit(*data) is forest

    def test_single_class_warns_and_predicts_it(self, data):
        X, _ = data
        with pytest.warns(fl.SingleClassWarning, match=r"`y` holds a single class \('ok'\)") as record:
            forest = fl.Forest(trees=3, rng=0).fit(X, np.full(40, "ok"))
        assert record[0].filename == __file__  # stacklevel points at the caller
        assert issubclass(fl.SingleClassWarning, fl.ForestlabWarning)
        assert forest.classes.tolist() == ["ok"]
        assert forest.predict(X[:5]).tolist() == ["ok"] * 5
        np.testing.assert_array_equal(forest.votes(X[:5]), np.ones((5, 1)))
        assert all(forest.tree(b).nodes == 1 for b in range(3))

    @pytest.mark.parametrize("labels", [
        np.array([3, -1, 7]),
        np.array(["rework", "pass", "hold"]),
        np.array([True, False, True]),
        np.array([2.5, -0.5, 10.0]),
    ], ids=["int", "str", "bool", "float"])
    def test_label_types_and_class_order(self, labels):
        rng = np.random.default_rng(3)
        X = rng.normal(size=(90, 2))
        code = np.digitize(X[:, 0], [-0.4, 0.4]) % labels.size
        y = labels[code]
        task = "classification" if labels.dtype.kind == "f" else None
        forest = fl.Forest(trees=15, rng=1, task=task).fit(X, y)
        assert forest.task == "classification"
        np.testing.assert_array_equal(forest.classes, np.unique(labels))
        votes = forest.votes(X)
        per_tree = forest.per_tree(X)
        for k in range(forest.classes.size):
            np.testing.assert_allclose(votes[:, k], (per_tree == k).mean(axis=0))
        np.testing.assert_array_equal(forest.predict(X), forest.classes[np.argmax(votes, axis=1)])
        assert forest.predict(X).dtype == forest.classes.dtype
        assert np.mean(forest.predict(X) == y) > 0.9

    def test_task_inference_and_override(self, data):
        X, y = data
        assert fl.Forest(trees=2, rng=0).fit(X, y).task == "classification"
        assert fl.Forest(trees=2, rng=0).fit(X, X[:, 1]).task == "regression"
        assert fl.Forest(trees=2, rng=0, task="regression").fit(X, y).task == "regression"
        assert fl.Forest(trees=2, rng=0, splitter="squared_error").fit(X, y).task == "regression"

    def test_array_likes_and_column_y(self, data):
        X, y = data
        a = fl.Forest(trees=3, rng=0).fit(X.tolist(), y.tolist())
        b = fl.Forest(trees=3, rng=0).fit(X, y.reshape(-1, 1))
        np.testing.assert_array_equal(a.predict(X), b.predict(X))


class TestPredict:
    """``predict`` needs a fitted forest and X like the training X."""

    def test_predict_iv(self, fitted, data):
        X, _ = data
        with pytest.raises(RuntimeError, match=r"this Forest is not fitted yet; call `fit\(X, y\)` first"):
            fl.Forest().predict(X)
        with pytest.raises(ValueError, match=r"`X` must have 3 features, as in training; got 2"):
            fitted.predict(X[:, :2])
        with pytest.raises(ValueError, match=r"`X` must be 2-D"):
            fitted.predict(X[0])
        with pytest.raises(ValueError, match=r"`X` holds 1 infinite value\(s\), first at row 2, column 1"):
            fitted.predict(np.where(np.arange(120).reshape(40, 3) == 7, np.inf, X))
        with pytest.raises(TypeError, match=r"`X` must hold real numbers"):
            fitted.predict(X.astype(str))

    def test_regression_predicts_the_tree_mean(self, regression, data):
        X, _ = data
        np.testing.assert_allclose(regression.predict(X), regression.per_tree(X).mean(axis=0))


class TestVotes:
    """``votes`` is for classification forests only."""

    def test_votes_iv(self, fitted, regression, data):
        X, _ = data
        with pytest.raises(RuntimeError, match=r"not fitted yet"):
            fl.Forest().votes(X)
        with pytest.raises(TypeError, match=r"`votes` is for classification forests; this forest does regression"):
            regression.votes(X)
        with pytest.raises(ValueError, match=r"`X` must have 3 features, as in training; got 4"):
            fitted.votes(np.zeros((2, 4)))

    def test_rows_sum_to_one(self, fitted, data):
        X, _ = data
        votes = fitted.votes(X)
        assert votes.shape == (40, 2)
        np.testing.assert_allclose(votes.sum(axis=1), 1.0)
        np.testing.assert_array_equal(fitted.classes, [0, 1])


class TestPerTree:
    """``per_tree`` gives class indices (int) or values (float), shape (trees, n)."""

    def test_per_tree_iv(self, fitted, data):
        X, _ = data
        with pytest.raises(RuntimeError, match=r"not fitted yet"):
            fl.Forest().per_tree(X)
        with pytest.raises(ValueError, match=r"`X` must have 3 features, as in training; got 2"):
            fitted.per_tree(X[:, :2])

    def test_shapes_and_dtypes(self, fitted, regression, data):
        X, _ = data
        out = fitted.per_tree(X[:7])
        assert out.shape == (4, 7) and out.dtype == np.int64
        assert set(np.unique(out)) <= {0, 1}
        out = regression.per_tree(X[:7])
        assert out.shape == (4, 7) and out.dtype == np.float64
        assert regression.classes is None


class TestTree:
    """``tree(b)`` returns one tree's flat arrays; the index is checked."""

    def test_tree_iv(self, fitted):
        with pytest.raises(RuntimeError, match=r"not fitted yet"):
            fl.Forest().tree(0)
        with pytest.raises(IndexError, match=r"`b` = 4 is out of range for a forest of 4 trees"):
            fitted.tree(4)
        with pytest.raises(IndexError, match=r"`b` = -5 is out of range for a forest of 4 trees"):
            fitted.tree(-5)
        with pytest.raises(TypeError, match=r"`b` must be an int tree index; got float"):
            fitted.tree(1.0)
        with pytest.raises(TypeError, match=r"`b` must be an int tree index; got bool"):
            fitted.tree(True)

    def test_negative_index_counts_from_the_end(self, fitted):
        assert fitted.tree(-1) is fitted.tree(3)

    def test_arrays_are_consistent_and_read_only(self, fitted):
        tree = fitted.tree(np.int64(0))
        names = ("feature", "threshold", "left", "right", "value", "cases", "impurity_decrease", "depth")
        for name in names:
            arr = getattr(tree, name)
            assert arr.shape == (tree.nodes,)
            assert not arr.flags.writeable
        inner = tree.feature >= 0
        np.testing.assert_array_equal(tree.right[inner], tree.left[inner] + 1)
        assert np.all(tree.left[inner] > np.flatnonzero(inner))
        assert np.all(np.isnan(tree.threshold[~inner])) and np.all(tree.left[~inner] == -1)
        np.testing.assert_array_equal(tree.depth[tree.left[inner]], tree.depth[inner] + 1)
        np.testing.assert_allclose(tree.cases[tree.left[inner]] + tree.cases[tree.right[inner]],
                                   tree.cases[inner])
        assert tree.cases[0] == 40  # bootstrap of n draws
        assert np.all(tree.impurity_decrease[inner] >= 0)


def test_no_stray_warnings_on_a_plain_fit(data):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fl.Forest(trees=3, rng=0).fit(*data).predict(data[0])


def test_failed_refit_leaves_the_forest_as_it_was():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(60, 3))
    y = (X[:, 0] > 0).astype(int)
    forest = fl.Forest(trees=5, rng=1).fit(X, y)
    before = forest.predict(X)
    bad_weights = np.zeros(60)
    bad_weights[0] = 1.0          # every tree's sample holds only weight-0 cases, almost surely
    with pytest.raises(ValueError):
        forest.fit(X[:, :2], y, weights=bad_weights)
    np.testing.assert_array_equal(forest.predict(X), before)
    assert forest.features == 3


def test_unpickled_trees_are_read_only():
    import pickle
    X = np.random.default_rng(0).normal(size=(40, 2))
    tree = fl.Forest(trees=1, rng=0).fit(X, X[:, 0] > 0).tree(0)
    again = pickle.loads(pickle.dumps(tree))
    assert not again.feature.flags.writeable and not again.threshold.flags.writeable


def test_a_declared_class_with_no_cases_is_refused():
    pd = pytest.importorskip("pandas")
    X = np.random.default_rng(0).normal(size=(20, 2))
    y = pd.Series(pd.Categorical(["ok", "scrap"] * 10, categories=["ok", "rework", "scrap"]))
    with pytest.raises(ValueError, match=r"`y` declares 1 class\(es\) with no cases: \['rework'\]"):
        fl.Forest(trees=2).fit(X, y)
    forest = fl.Forest(trees=2, rng=0).fit(X, y.cat.remove_unused_categories())
    assert forest.classes.tolist() == ["ok", "scrap"]


@given(st.sampled_from(["i1", "i2", "i8", "u1", "u8", "f8"]), st.integers(0, 2**64 - 1), st.integers(0, 300),
       st.integers(1, 50), st.booleans())
@example("i1", 0, 255, 50, True)  # -128 to 127: a difference no int8 holds
@example("i8", 0, 300, 50, True)  # from the smallest int64
@example("u8", 2**64 - 1, 300, 50, True)  # up to the largest uint64
def test_counted_classes_equal_numpy_unique(dtype, base, span, size, integral):
    """Class labels found by counting (integer or integral-float labels of a small range) against
    ``np.unique(return_inverse=True)`` (NumPy as the reference), at every integer width's extremes, and
    the cases it leaves to ``np.unique`` (fractions, ranges wider than its table)."""
    from forestlab.intake.validation import _counted_classes

    kind = np.dtype(dtype)
    rng = np.random.default_rng(base % 2**32)
    if kind.kind == "f":
        labels = (rng.integers(0, span + 1, size) - span // 2).astype(float)
        if not integral:  # two labels a fraction apart
            labels[rng.integers(0, size)] = 0.25 + labels.max()
    else:
        info = np.iinfo(kind)
        low = info.min + base % max(1, int(info.max) - int(info.min) - span + 1)
        labels = np.array([low + int(v) for v in rng.integers(0, span + 1, size)], dtype=object).astype(kind)
    found = _counted_classes(labels)
    if kind.kind == "f" and not integral and size > 1:
        assert found is None
        return
    classes, codes = np.unique(labels, return_inverse=True)
    assert found is not None
    assert found[0].dtype == classes.dtype
    np.testing.assert_array_equal(found[0], classes)
    np.testing.assert_array_equal(found[1], codes.reshape(-1))
    wide = np.array([0, 2**17], dtype=kind) if kind.itemsize > 2 or kind.kind == "f" else None
    if wide is not None:
        assert _counted_classes(wide) is None
