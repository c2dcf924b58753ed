"""Categorical predictors: subset splits against brute force over all subsets, and the documented rules.

Reference: Breiman, Friedman, Olshen & Stone (1984), *Classification and Regression Trees*, section 9.4 (and
Fisher 1958): for two classes and for squared error, ordering the categories by the class-1 share / mean
response and searching the ordered split points finds the best of all 2**(k-1) - 1 subsets.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import forestlab as fl


def best_subset_score(codes, target, splitter, classes, min_leaf):
    """Largest weighted impurity decrease over every two-way partition of the present categories."""
    stats = np.column_stack([np.ones(len(target)), splitter.statistics(target, classes)])
    total = stats.sum(axis=0)
    parent = total[0] * splitter.impurity(total)
    present = np.unique(codes)
    best = -np.inf
    for size in range(1, len(present)):
        for subset in itertools.combinations(present, size):
            left = np.isin(codes, subset)
            if left.sum() < min_leaf or (~left).sum() < min_leaf:
                continue
            SL, SR = stats[left].sum(axis=0), stats[~left].sum(axis=0)
            best = max(best, parent - SL[0] * splitter.impurity(SL) - SR[0] * splitter.impurity(SR))
    return best


def root_split(codes, y, splitter, min_leaf=1):
    forest = fl.Forest(trees=1, sampler=fl.AllFeatures(), splitter=splitter, min_leaf=min_leaf,
                       sample_size=len(y), replace=False, depth_limit=1, categorical=[0], rng=0)
    forest.fit(codes[:, None].astype(float), y)
    return forest, forest.tree(0)


@st.composite
def categorical_problems(draw):
    n = draw(st.integers(4, 40))
    k = draw(st.integers(2, 6))
    codes = np.array(draw(st.lists(st.integers(0, k - 1), min_size=n, max_size=n)))
    kind = draw(st.sampled_from(["gini", "entropy", "squared_error"]))
    if kind == "squared_error":
        y = np.array(draw(st.lists(st.integers(-4, 4), min_size=n, max_size=n)), dtype=float)
    else:
        y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)))
    return codes, y, kind, draw(st.sampled_from([1, 2]))


@settings(max_examples=150)
@given(categorical_problems())
def test_ordered_search_finds_the_best_subset(problem):
    codes, y, kind, min_leaf = problem
    if np.unique(y).size < 2 or np.unique(codes).size < 2:
        return
    forest, tree = root_split(codes, y, kind, min_leaf)
    target = np.unique(y, return_inverse=True)[1] if kind != "squared_error" else y
    classes = 0 if kind == "squared_error" else forest.classes.size
    expected = best_subset_score(codes, target, forest.splitter, classes, min_leaf)
    if expected == -np.inf:
        assert tree.feature[0] == -1
        return
    assert tree.feature[0] == 0 and np.isnan(tree.threshold[0])
    # the stored left set (bits indexed by the sorted distinct labels) is allowed and reproduces the score
    encoded = np.unique(codes, return_inverse=True)[1].astype(np.uint64)
    left = ((tree.category_left[0, 0] >> encoded) & np.uint64(1)).astype(bool)
    assert min(left.sum(), (~left).sum()) >= min_leaf
    stats = np.column_stack([np.ones(len(y)), forest.splitter.statistics(target, classes)])
    SL, SR, S = stats[left].sum(0), stats[~left].sum(0), stats.sum(0)
    imp = forest.splitter.impurity
    score = S[0] * imp(S) - SL[0] * imp(SL) - SR[0] * imp(SR)
    np.testing.assert_allclose(tree.impurity_decrease[0], score, rtol=1e-6, atol=1e-6)   # stored as float32
    if min_leaf == 1:  # nothing ruled out (every case weighs 1): the ordered search is exact
        np.testing.assert_allclose(score, expected, rtol=1e-9, atol=1e-9)
    else:  # min_leaf can rule out the best subset's order position: never better than the best allowed subset
        assert score <= expected + 1e-9


def test_more_classes_use_a_valid_subset_no_better_than_brute_force():
    # Coppersmith, Hong & Hosking (1999): a heuristic for K > 2; never better than the exhaustive optimum
    rng = np.random.default_rng(3)
    for _ in range(20):
        codes = rng.integers(0, 6, 60)
        y = (codes + rng.integers(0, 2, 60)) % 3
        forest, tree = root_split(codes, y, "gini")
        expected = best_subset_score(codes, y, forest.splitter, 3, 1)
        assert tree.impurity_decrease[0] <= expected * (1 + 1e-6) + 1e-6
        assert tree.impurity_decrease[0] >= 0.6 * expected


class TestCategoricalForest:
    def test_validation(self):
        with pytest.raises(TypeError, match="`categorical` entries must be int positions or str names"):
            fl.Forest(categorical=[1.5])
        with pytest.raises(ValueError, match="`categorical` lists a column twice"):
            fl.Forest(categorical=[1, 1])
        X = np.zeros((10, 2))
        with pytest.raises(ValueError, match="`categorical` position 5 is out of range for 2 features"):
            fl.Forest(trees=2, categorical=[5]).fit(X, np.arange(10) % 2)
        with pytest.raises(ValueError, match="`categorical` names column 'shift', but the data has no column"):
            fl.Forest(trees=2, categorical=["shift"]).fit(X, np.arange(10) % 2)

    def test_subset_signal_is_found_and_unseen_categories_follow_missing(self):
        rng = np.random.default_rng(0)
        n = 1500
        code = rng.choice([3.0, 7.5, 11.0, 20.0, 41.0], n)   # any real values are category labels
        noise = rng.normal(size=n)
        y = np.isin(code, [7.5, 41.0]).astype(int)
        X = np.column_stack([code, noise])
        forest = fl.Forest(trees=30, sampler=fl.AllFeatures(), categorical=[0], rng=2).fit(X, y)
        assert np.all(forest.predict(X) == y)
        root = forest.tree(0)
        assert root.feature[0] == 0
        # an unseen label and a missing one go the same way as each split's missing side
        odd = np.array([[99.0, 0.0], [np.nan, 0.0]])
        np.testing.assert_array_equal(forest.per_tree(odd)[:, 0], forest.per_tree(odd)[:, 1])

    def test_ordered_codes_lose_to_subsets_on_a_scattered_pattern(self):
        # common practice: treating labels as ordered numbers needs more splits for a scattered subset
        rng = np.random.default_rng(1)
        code = rng.integers(0, 12, 600).astype(float)
        y = np.isin(code, [0, 3, 5, 8, 11]).astype(int)
        X = code[:, None]
        as_set = fl.Forest(trees=1, sampler=fl.AllFeatures(), sample_size=600, replace=False,
                           categorical=[0], rng=0).fit(X, y).tree(0)
        as_number = fl.Forest(trees=1, sampler=fl.AllFeatures(), sample_size=600, replace=False,
                              rng=0).fit(X, y).tree(0)
        assert as_set.leaves == 2
        assert as_number.leaves > 2

    def test_more_classes_with_a_node_missing_every_category(self):
        # a node whose cases all miss the categorical feature has no category to order (was a NaN covariance)
        rng = np.random.default_rng(4)
        n = 300
        group = rng.integers(0, 2, n)
        code = np.where(group == 1, np.nan, rng.integers(0, 4, n).astype(float))
        y = np.where(group == 1, rng.integers(0, 3, n), np.nan_to_num(code) % 3).astype(int)
        X = np.column_stack([group + rng.normal(scale=0.01, size=n), code])
        forest = fl.Forest(trees=5, sampler=fl.AllFeatures(), categorical=[1], rng=0).fit(X, y)
        assert np.mean(forest.predict(X)[group == 0] == y[group == 0]) == 1.0
