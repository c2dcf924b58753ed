"""`Forest.add_trees` continues the seed numbering: a grown-on forest equals one fit of all the trees.

Reference: numpy's SeedSequence spawning (tree b = SeedSequence(entropy, spawn_key=(b,))), so children
spawned later continue the stream (numpy `test_generator_spawning`, common practice); the comparison is bit
for bit.
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import pytest

import forestlab as fl
from forestlab.synthetic import friedman1, twonorm


def assert_same_forest(a, b):
    assert a.inbag.tobytes() == b.inbag.tobytes()
    assert len(a._view.trees) == len(b._view.trees)
    for ta, tb in zip(a._view.trees, b._view.trees):
        for f in dataclasses.fields(ta):
            assert getattr(ta, f.name).tobytes() == getattr(tb, f.name).tobytes(), f.name


def assert_same_oob(a, b):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", fl.NeverOutOfBagWarning)   # few trees: some case may be always in-bag
        a.oob, b.oob  # noqa: B018  (first access computes and warns)
    for name in ("coverage", "error_curve", "margins", "votes", "predictions", "residuals"):
        x, y = getattr(a.oob, name), getattr(b.oob, name)
        if x is None:
            assert y is None
        else:
            assert np.asarray(x).tobytes() == np.asarray(y).tobytes(), name
    assert a.oob.error == b.oob.error


class TestAddTrees:
    def test_validation(self):
        X, y = twonorm(60, dims=4, rng=1)
        with pytest.raises(RuntimeError, match="not fitted yet"):
            fl.Forest(trees=3).add_trees(X, y, trees=2)
        forest = fl.Forest(trees=3, rng=1).fit(X, y)
        with pytest.raises(ValueError, match="`trees` must be at least 1"):
            forest.add_trees(X, y, trees=0)
        with pytest.raises(TypeError, match="`trees` must be an int"):
            forest.add_trees(X, y, trees=2.0)
        with pytest.raises(ValueError, match="`X` must have 4 features, as in training"):
            forest.add_trees(X[:, :3], y, trees=2)
        with pytest.raises(ValueError, match=r"`X` has shape \(59, 4\), the fit data \(60, 4\)"):
            forest.add_trees(X[:-1], y[:-1], trees=2)
        moved = X.copy()
        moved[5, 2] += 1e-9
        with pytest.raises(ValueError, match="the values of `X` or `y` differ from the fit data"):
            forest.add_trees(moved, y, trees=2)
        with pytest.raises(ValueError, match="the values of `X` or `y` differ from the fit data"):
            forest.add_trees(X, 1 - y, trees=2)
        assert forest.trees == 3 and forest.inbag.shape == (3, 60)   # refused calls change nothing

    @pytest.mark.parametrize("make_rng", [lambda: 5, lambda: np.random.SeedSequence(77),
                                          lambda: np.random.default_rng(9)], ids=["int", "seedsequence",
                                                                                  "generator"])
    def test_equals_one_fit_of_all_trees(self, make_rng):
        X, y = twonorm(150, dims=6, rng=2)
        grown_on = fl.Forest(trees=20, rng=make_rng()).fit(X, y)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", fl.NeverOutOfBagWarning)
            before = grown_on.oob
        grown_on.add_trees(X, y, trees=9).add_trees(X, y, trees=4)
        whole = fl.Forest(trees=33, rng=make_rng()).fit(X, y)
        assert grown_on.trees == 33 and grown_on.oob is not before
        assert_same_forest(grown_on, whole)
        assert_same_oob(grown_on, whole)
        assert repr(grown_on) == repr(whole).replace(repr(whole._rng), repr(grown_on._rng))

    def test_regression_equals_one_fit(self):
        X, y = friedman1(120, rng=3)
        grown_on = fl.Forest(trees=7, rng=4).fit(X, y).add_trees(X.tolist(), list(y), trees=6)
        whole = fl.Forest(trees=13, rng=4).fit(X, y)
        assert_same_forest(grown_on, whole)
        assert_same_oob(grown_on, whole)

    def test_string_labels_and_refit(self):
        X, y = twonorm(80, dims=3, rng=5)
        labels = np.where(y == 1, "b", "a")
        forest = fl.Forest(trees=4, rng=6).fit(X, labels).add_trees(X, labels, trees=3)
        assert forest.inbag.shape == (7, 80)
        with pytest.raises(ValueError, match="differ from the fit data"):
            forest.add_trees(X, np.where(y == 1, "c", "a"), trees=1)
        forest.fit(X[:40], labels[:40])              # a refit keeps the fingerprint of the new data
        forest.add_trees(X[:40], labels[:40], trees=1)
        assert forest.inbag.shape == (8, 40)

    def test_missing_values_keep_the_fingerprint(self):
        X, y = twonorm(90, dims=3, rng=7)
        X[::7, 1] = np.nan
        forest = fl.Forest(trees=5, rng=8).fit(X, y)
        forest.add_trees(X.copy(), y, trees=3)       # NaN compares unequal, but the fingerprint matches
        assert_same_forest(forest, fl.Forest(trees=8, rng=8).fit(X, y))
        filled = np.nan_to_num(X)
        with pytest.raises(ValueError, match="differ from the fit data"):
            forest.add_trees(filled, y, trees=1)

    def test_categorical_predictors(self):
        X, y = twonorm(90, dims=3, rng=9)
        X[:, 0] = np.floor(np.abs(X[:, 0]) * 2)         # a coded category
        forest = fl.Forest(trees=6, categorical=[0], rng=3).fit(X, y).add_trees(X, y, trees=4)
        assert_same_forest(forest, fl.Forest(trees=10, categorical=[0], rng=3).fit(X, y))
        assert_same_oob(forest, fl.Forest(trees=10, categorical=[0], rng=3).fit(X, y))
