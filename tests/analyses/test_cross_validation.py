"""`fl.cross_validated_error`: k-fold cross-validation of a forest's settings.

Reference: stratified k-fold cross-validation as recommended by Kohavi (1995), "A study of cross-validation
and bootstrap for accuracy estimation and model selection" (IJCAI; from memory): every case is held out
exactly once, class proportions are kept in every fold.
"""

from __future__ import annotations

import numpy as np
import pytest

import forestlab as fl
from forestlab.synthetic import friedman1


def _labelled(n=90, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    y = np.array(["low", "mid", "high"])[np.minimum((X[:, 0] > 0) + (X[:, 1] > 1) * 1, 2)]
    return X, y


class TestCrossValidatedError:
    def test_validation(self):
        X, y = _labelled()
        with pytest.raises(TypeError, match="`forest_or_settings` must be a Forest"):
            fl.cross_validated_error("forest", X, y)
        with pytest.raises(ValueError, match="`forest_or_settings` must not hold `rng`"):
            fl.cross_validated_error({"trees": 5, "rng": 1}, X, y)
        with pytest.raises(TypeError, match="`forest_or_settings` is not a valid set of Forest arguments"):
            fl.cross_validated_error({"leaves": 5}, X, y)
        with pytest.raises(TypeError, match="`folds` must be an int"):
            fl.cross_validated_error(fl.Forest(trees=2), X, y, folds=True)
        with pytest.raises(ValueError, match=r"`folds` must lie between 2 and the number of cases \(90\)"):
            fl.cross_validated_error(fl.Forest(trees=2), X, y, folds=1)
        with pytest.raises(ValueError, match="`y` has 89 values but `X` has 90 rows"):
            fl.cross_validated_error(fl.Forest(trees=2), X, y[:-1])

    def test_folds_are_stratified_and_every_case_is_held_out_once(self):
        X, y = _labelled(97)
        cv = fl.cross_validated_error(fl.Forest(trees=5), X, y, folds=10, rng=3)
        assert cv.stratified and cv.fold.shape == (97,) and set(cv.fold) == set(range(10))
        sizes = np.bincount(cv.fold)
        assert sizes.max() - sizes.min() <= 1
        for label in np.unique(y):
            per_fold = np.bincount(cv.fold[y == label], minlength=10)
            assert per_fold.max() - per_fold.min() <= 1
        for j in range(10):                           # fold errors are the held-out misclassification rates
            held = cv.fold == j
            assert cv.fold_errors[j] == np.mean(cv.predictions[held] != y[held])
        assert cv.mean == pytest.approx(cv.fold_errors.mean())
        assert cv.standard_error == pytest.approx(cv.fold_errors.std(ddof=1) / np.sqrt(10))

    def test_fold_forest_is_grown_without_its_fold(self):
        # The prediction of a held-out case comes from a forest that never saw it: refit fold 0 by hand from
        # the documented seeding (child j + 1 of the root SeedSequence) and compare.
        X, y = _labelled(60, seed=2)
        cv = fl.cross_validated_error(fl.Forest(trees=7), X, y, folds=3, rng=5)
        held = cv.fold == 0
        seed = np.random.SeedSequence(5, spawn_key=(1,))
        by_hand = fl.Forest(trees=7, rng=seed).fit(X[~held], y[~held]).predict(X[held])
        assert np.array_equal(cv.predictions[held], by_hand)

    def test_fitted_forest_and_mapping_give_the_same_result(self):
        X, y = _labelled(70, seed=4)
        forest = fl.Forest(trees=6, min_leaf=2, rng=9).fit(X, y)
        inbag = forest.inbag.copy()
        a = fl.cross_validated_error(forest, X, y, folds=4, rng=1)
        b = fl.cross_validated_error({"trees": 6, "min_leaf": 2}, X, y, folds=4, rng=1)
        assert np.array_equal(a.fold_errors, b.fold_errors) and np.array_equal(a.predictions, b.predictions)
        assert np.array_equal(forest.inbag, inbag)     # the given forest is left alone
        assert "4 folds, stratified" in repr(a)

    def test_regression_folds_use_mean_squared_error(self):
        X, y = friedman1(80, rng=1)
        cv = fl.cross_validated_error(fl.Forest(trees=10), X, y, folds=5, rng=2)
        assert not cv.stratified
        for j in range(5):
            held = cv.fold == j
            assert cv.fold_errors[j] == pytest.approx(np.mean((cv.predictions[held] - y[held]) ** 2))
