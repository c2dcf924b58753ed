"""forest.interaction (Friedman & Popescu's H) and forest.doubt_reasons, against their definitions and two
published problems."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

import forestlab as fl
from forestlab.analyses.interaction import interaction
from forestlab.analyses.view import FittedForest
from forestlab.engine.tree import NODE_STORAGE, Tree
from forestlab.synthetic import friedman1, twonorm


def stump_tree(splits: list[tuple[int, float]], values: list[float]) -> Tree:
    """A complete tree of depth len(splits): level d splits feature splits[d] at its threshold."""
    feature, threshold = [], []
    for d, (f, t) in enumerate(splits):
        feature += [f] * 2**d
        threshold += [t] * 2**d
    leaves = 2 ** len(splits)
    feature += [-1] * leaves
    threshold += [np.nan] * leaves
    nodes = len(feature)
    value = np.concatenate([np.zeros(nodes - leaves), values])
    cases = np.array([2.0 ** (len(splits) - int(np.log2(k + 1))) for k in range(nodes)])
    arrays = {"feature": feature, "threshold": threshold, "value": value, "cases": cases,
              "impurity_decrease": np.zeros(nodes), "missing_left": np.zeros(nodes, dtype=bool)}
    fields = {name: np.asarray(arrays[name], dtype=dtype) for name, dtype in NODE_STORAGE.items() if name in arrays}
    return Tree(**fields, category_left=np.zeros((nodes, 0), dtype=np.uint64))


def forest_of(trees: list[Tree], X: np.ndarray) -> FittedForest:
    return FittedForest(task="regression", trees=tuple(trees), inbag=np.ones((len(trees), X.shape[0]), dtype=np.uint8),
                        classes=None, feature_names=tuple(f"x{j}" for j in range(X.shape[1])), X=X,
                        y=np.zeros(X.shape[0]))


def h_by_definition(predict, Z: np.ndarray, j: int, k: int) -> tuple[float, float]:
    """Friedman & Popescu (2008), equations 44 and 46, with every partial dependence written as a loop."""
    N = Z.shape[0]

    def pd(columns, i):
        made = Z.copy()
        made[:, columns] = Z[i, columns]
        return predict(made).mean()

    def centred(v):
        return v - v.mean()

    F = centred(predict(Z))
    Fj = centred(np.array([pd([j], i) for i in range(N)]))
    Fk = centred(np.array([pd([k], i) for i in range(N)]))
    Fjk = centred(np.array([pd([j, k], i) for i in range(N)]))
    rest = [c for c in range(Z.shape[1]) if c != j]
    Fr = centred(np.array([pd(rest, i) for i in range(N)]))
    return (float(np.sqrt(np.sum((Fjk - Fj - Fk) ** 2) / np.sum(Fjk**2))),
            float(np.sqrt(np.sum((F - Fj - Fr) ** 2) / np.sum(F**2))))


def test_h_equals_its_definition_and_vanishes_for_additive_trees():
    """Friedman & Popescu (2008), section 8.1: H_jk = 0 when F is additive in x_j and x_k (each tree here uses
    one feature), > 0 for a tree that splits x1 inside x0; checked against equations 44 and 46 written out."""
    rng = np.random.default_rng(0)
    X = rng.uniform(size=(40, 3))
    additive = forest_of([stump_tree([(0, 0.5)], [0.0, 1.0]), stump_tree([(1, 0.4)], [0.0, 2.0])], X)
    strength = interaction(additive, cases=40, rng=1)
    assert strength.pairwise[0, 1] == pytest.approx(0.0, abs=1e-12)
    product = forest_of([stump_tree([(0, 0.5), (1, 0.4)], [0.0, 0.0, 0.0, 3.0]),
                         stump_tree([(2, 0.6)], [0.0, 1.0])], X)
    strength = interaction(product, cases=25, rng=2)
    Z = X[np.sort(np.random.default_rng(fl.engine.seeding.root_seed(2)).choice(40, 25, replace=False))]

    def predict(rows):
        return np.mean([tree.value[fl.engine.tree.leaf_index(tree, rows)] for tree in product.trees], axis=0)

    pair, total = h_by_definition(predict, Z, 0, 1)
    assert strength.pairwise[0, 1] == pytest.approx(pair, rel=1e-12) and pair > 0.1
    assert strength.total[0] == pytest.approx(total, rel=1e-12)
    assert strength.pairwise[0, 2] == pytest.approx(0.0, abs=1e-12)


def test_h_of_a_fitted_forest_with_categories_and_gaps_equals_its_definition():
    """The same check on a fitted two-class forest with a categorical column and missing values: the leaves'
    boxes route cases as prediction does (Friedman & Popescu 2008, equations 44 and 46)."""
    rng = np.random.default_rng(3)
    X = rng.normal(size=(120, 4))
    X[:, 3] = rng.integers(0, 4, 120)
    y = np.where((X[:, 0] > 0) ^ (X[:, 3] == 2), "a", "b")
    X[rng.random(X.shape) < 0.1] = np.nan
    forest = fl.Forest(trees=4, rng=1, categorical=[3]).fit(X, y)
    strength = forest.interaction([0, 3, 1], cases=30, rng=4, label="b")
    view = forest._view
    Z = view.X[np.sort(np.random.default_rng(fl.engine.seeding.root_seed(4)).choice(120, 30, replace=False))]

    def predict(rows):
        return np.mean([tree.value[fl.engine.tree.leaf_index(tree, rows)] == 1 for tree in view.trees], axis=0)

    pair, total = h_by_definition(predict, Z, 0, 3)
    assert strength.pairwise[0, 1] == pytest.approx(pair, rel=1e-10)
    assert strength.total[0] == pytest.approx(total, rel=1e-10)


def test_interaction_messages_and_print():
    rng = np.random.default_rng(1)
    X = rng.normal(size=(80, 3))
    forest = fl.Forest(trees=5, rng=1).fit(X, np.where(X[:, 0] * X[:, 1] > 0, "a", "b"))
    with pytest.raises(ValueError, match="unknown column 'z'"):
        forest.interaction(["x0", "z"])
    with pytest.raises(ValueError, match="at least two different columns"):
        forest.interaction([1, 1])
    with pytest.raises(ValueError, match="`cases` must be an int of at least 2"):
        forest.interaction(cases=1)
    text = str(forest.interaction(cases=20, rng=1, label="a"))
    assert text.startswith("interaction strength (Friedman & Popescu's H) of the share of votes for 'a', over 20")


@pytest.mark.slow
def test_friedman1_additive_parts_and_the_product_term():
    """Friedman (1991), Ann. Statist. 19, the first test function: y = 10 sin(pi x1 x2) + 20 (x3 - 0.5)^2
    + 10 x4 + 5 x5 + e. x4 and x5 enter additively, so their attributions are nearly linear in their values
    with slopes near 10 and 5 (fitted: 8.70 and 3.66, correlations 0.990 and 0.983 on these data; the forest
    flattens a weak linear term, most so at the ends), and H is large only for the product term (x1, x2)
    (measured 0.278) and near 0 for (x4, x5) (measured 0.042)."""
    X, y = friedman1(2000, rng=11)
    forest = fl.Forest(trees=100, rng=12).fit(X, y)
    shares = forest.attributions(X[:1000]).values
    for column, low, high in ((3, 7.5, 11.0), (4, 3.0, 6.0)):           # true slopes 10 and 5
        fitted, _ = np.polyfit(X[:1000, column], shares[:, column], 1)
        assert low < fitted < high, (column, fitted)
        assert np.corrcoef(X[:1000, column], shares[:, column])[0, 1] > 0.97
    strength = forest.interaction([0, 1, 3, 4], cases=100, rng=13)
    assert strength.pairwise[0, 1] > 3 * strength.pairwise[2, 3]
    assert strength.pairwise[2, 3] < 0.08


# ----------------------------------------------------------------------------------------- doubtful cases
@pytest.fixture(scope="module")
def flipped():
    """Breiman's (1996, tech. report 460) twonorm, 20 inputs, with 8% of the labels flipped on purpose."""
    X, y = twonorm(600, dims=20, rng=4)
    flip = np.random.default_rng(5).random(600) < 0.08
    recorded = np.where(flip, 1 - y, y)
    return fl.Forest(trees=150, rng=6).fit(X, recorded), recorded, flip


@pytest.mark.slow
def test_flipped_labels_point_to_the_other_class(flipped):
    """Label noise shows as cases whose out-of-bag votes go against their record (Breiman 2001, section 10,
    common practice): the OOB attributions of the flipped cases add up to a fall in the recorded class's vote
    share below the baseline for nearly all of them (measured 97%), and the pull toward the forest's label is
    carried by many inputs (twonorm's classes differ in the mean of every input)."""
    forest, recorded, flip = flipped
    reasons = forest.doubt_reasons(np.flatnonzero(flip))
    rows = np.arange(len(reasons))
    toward_record = reasons.shares[rows, :, recorded[flip]].sum(axis=1)
    assert np.mean(toward_record < 0) > 0.9
    assert np.all(reasons.support[:, 1] >= reasons.support[:, 0])
    assert np.mean(np.count_nonzero(reasons.pull > 0, axis=1) >= 8) > 0.8


def test_reasons_of_the_doubtful_list(flipped):
    forest, recorded, flip = flipped
    doubtful = forest.oob.doubtful(top=5)
    reasons = forest.doubt_reasons(doubtful)
    assert np.array_equal(reasons.case, doubtful.case)
    votes = forest.oob.votes[doubtful.case]
    assert np.allclose(reasons.support[:, 0], votes[np.arange(5), recorded[doubtful.case]], atol=1e-12)
    every = forest.attributions(oob=True).values[doubtful.case]        # all training cases, then picked
    said = np.searchsorted(forest.classes, doubtful.out_of_bag)
    expected = every[np.arange(5), :, said] - every[np.arange(5), :, recorded[doubtful.case]]
    assert np.allclose(reasons.pull, expected, rtol=0, atol=1e-12)
    text = reasons.describe(0)
    assert text.startswith(f"case {doubtful.case[0]}: recorded {recorded[doubtful.case[0]]}, but ")
    assert "speaks against the record: x" in text
    with pytest.raises(ValueError, match=r"training row indices in \[0, 600\)"):
        forest.doubt_reasons([600])
    with pytest.raises(TypeError, match="`cases` must be DoubtfulCases"):
        forest.doubt_reasons([0.5])


def test_regression_reasons_sign_toward_the_forest():
    X, y = friedman1(300, rng=2)
    y = y.copy()
    y[:3] += 15.0                                       # three cases recorded far too high
    forest = fl.Forest(trees=60, rng=3).fit(X, y)
    reasons = forest.doubt_reasons([0, 1, 2])
    assert np.all(reasons.support[:, 1] < reasons.support[:, 0])
    for i, j in itertools.product(range(3), range(10)):
        assert reasons.pull[i, j] == pytest.approx(-reasons.shares[i, j], abs=1e-15)
