"""The many-class categorical search by runs (engine/category_runs.py) against a reference written here.

The reference grows a depth-2 tree node by node: each node's present categories ordered by the dense
many-class order of ``categories.category_order`` (the principal-component heuristic of Coppersmith, Hong &
Hosking 1999, "Partitioning nominal attributes in decision trees"), then every split point of that order
scored with the splitter's own impurity, the best one kept (ties: lowest feature, then the earliest split
point). The engine must choose the same feature and the same left set, with the same decrease.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

import forestlab as fl
from forestlab.engine.categories import category_order, two_category_first
from example_samplers import FirstPlusOne


def node_split(X, y, K, splitter, min_leaf, width, numeric=()):
    """(decrease, feature, left categories or numeric cut, heavier left) of the best ordered split of the
    node's cases, or None; the features in ``numeric`` are cut between distinct values."""
    stats = np.column_stack([np.ones(len(y)), splitter.statistics(y, K)])
    total = stats.sum(axis=0)
    parent = total[0] * splitter.impurity(total)
    cuts = []
    for j in range(X.shape[1]):
        codes = X[:, j]
        if j in numeric:
            values = np.unique(codes)
            for t in range(1, values.size):
                left = codes <= values[t - 1]
                if left.sum() < min_leaf or (~left).sum() < min_leaf:
                    continue
                SL, SR = stats[left].sum(axis=0), stats[~left].sum(axis=0)
                cuts.append((parent - SL[0] * splitter.impurity(SL) - SR[0] * splitter.impurity(SR), j,
                             0.5 * (values[t - 1] + values[t]), None))
            continue
        weight = np.bincount(codes, minlength=width).astype(float)
        by_class = np.bincount(codes * K + y, minlength=width * K).reshape(width, K).astype(float)
        pos = category_order(weight[None], None, by_class[None])[0]
        present = np.flatnonzero(weight > 0)
        ordered = present[np.argsort(pos[present], kind="stable")]
        for t in range(1, ordered.size):
            left = np.isin(codes, ordered[:t])
            if left.sum() < min_leaf or (~left).sum() < min_leaf:
                continue
            SL, SR = stats[left].sum(axis=0), stats[~left].sum(axis=0)
            cuts.append((parent - SL[0] * splitter.impurity(SL) - SR[0] * splitter.impurity(SR), j,
                         frozenset(ordered[:t].tolist()), left.sum() >= (~left).sum()))
    if not cuts:
        return None
    best = max(c[0] for c in cuts)
    bar = best - 1e-12 * max(abs(best), abs(parent))
    return next(c for c in cuts if c[0] >= bar)


@st.composite
def problems(draw):
    n = draw(st.integers(6, 60))
    p = draw(st.integers(1, 3))
    k = draw(st.integers(2, 6))
    K = draw(st.integers(3, 5))
    X = np.array(draw(st.lists(st.lists(st.integers(0, k - 1), min_size=p, max_size=p), min_size=n, max_size=n)))
    y = np.array(draw(st.lists(st.integers(0, K - 1), min_size=n, max_size=n)))
    numeric = (p - 1,) if p > 1 and draw(st.booleans()) else ()
    return X, y, draw(st.sampled_from(["gini", "entropy"])), draw(st.sampled_from([1, 2])), numeric


@settings(max_examples=120, deadline=None)
@given(problems())
def test_depth_two_trees_match_the_dense_order_reference(problem):
    X, y, kind, min_leaf, numeric = problem
    # codes as intake makes them: 0..k-1 over the values present in each column, classes 0..K-1 (a numeric
    # column keeps its integer values, so ties)
    X = np.column_stack([np.unique(X[:, j], return_inverse=True)[1] for j in range(X.shape[1])])
    y = np.unique(y, return_inverse=True)[1]
    K = int(y.max()) + 1
    if K < 3:
        return
    forest = fl.Forest(trees=1, sampler=fl.AllFeatures(), splitter=kind, min_leaf=min_leaf, sample_size=len(y),
                       replace=False, depth_limit=2,
                       categorical=[j for j in range(X.shape[1]) if j not in numeric], rng=0)
    tree = forest.fit(X.astype(float), y).tree(0)
    width = int(X.max()) + 1
    nodes = [(0, np.arange(len(y)))]  # breadth first: (node, its cases)
    inner = 0
    for node, cases in nodes:
        pure = np.unique(y[cases]).size <= 1
        found = None if pure or len(cases) < 2 * min_leaf or node >= 3 else \
            node_split(X[cases], y[cases], K, forest.splitter, min_leaf, width, numeric)
        if found is None:
            assert tree.feature[node] == -1
            continue
        decrease, j, left_set, heavier_left = found
        assert tree.feature[node] == j
        np.testing.assert_allclose(tree.impurity_decrease[node], decrease, rtol=1e-6, atol=1e-6)
        if j in numeric:
            assert tree.threshold[node] == left_set
            goes_left = X[cases, j] <= left_set
            nodes += [(2 * inner + 1, cases[goes_left]), (2 * inner + 2, cases[~goes_left])]
            inner += 1
            continue
        bits = tree.category_left[node, 0]
        stored = {c for c in range(width) if (bits >> np.uint64(c)) & np.uint64(1)}
        present = set(np.unique(X[cases, j]).tolist())
        if decrease > 1e-9:  # (a split of no gain: categories of equal shares, whose order is arbitrary)
            assert stored & present == left_set
        # categories absent from the node follow the missing side: the heavier child
        assert all((c in stored) == heavier_left for c in set(range(width)) - present)
        goes_left = np.isin(X[cases, j], sorted(stored))
        nodes += [(2 * inner + 1, cases[goes_left]), (2 * inner + 2, cases[~goes_left])]
        inner += 1


def test_two_categories_take_the_order_of_the_power_iterations():
    rng = np.random.default_rng(5)
    C, k, K = 400, 2, 6
    by_class = rng.integers(0, 4, size=(C, k, K)).astype(float)
    by_class[by_class.sum(axis=2) == 0] = 1.0
    weight = by_class.sum(axis=2)
    shares = by_class / weight[..., None]
    distinct = np.any(shares[:, 0] != shares[:, 1], axis=1)
    more = np.count_nonzero(by_class.any(axis=1), axis=1) > 2
    pos = category_order(weight, None, by_class)
    first = two_category_first(shares)
    assert distinct.sum() > 300 and more.sum() > 300
    np.testing.assert_array_equal(first[distinct & more], pos[distinct & more, 0] == 0)
    # equal shares: the code order
    assert np.all(two_category_first(np.repeat(shares[:, :1], 2, axis=1)))


def test_levels_searched_without_the_sort_grow_the_trees_of_the_sorted_runs(monkeypatch):
    # all-categorical Gini levels take the run tables from the unsorted pairs (category_tables); forcing the
    # sorted runs (category_runs, left sets read from X) must give the same trees bit for bit
    from forestlab.engine.category_runs import CategoryRunsPath

    rng = np.random.default_rng(11)
    X = rng.integers(0, 5, size=(400, 4)).astype(float)
    y = (X[:, 0] + X[:, 1] + rng.integers(0, 3, 400)).astype(int) % 4
    forests = []
    for sampler in (2, FirstPlusOne()):
        fits = []
        for sorted_runs in (False, True):
            if sorted_runs:
                monkeypatch.setattr(CategoryRunsPath, "sorts_nothing", lambda self, cand: False)
            fits.append(fl.Forest(trees=8, sampler=sampler, categorical=[0, 1, 2, 3], rng=2).fit(X, y))
            monkeypatch.undo()
        forests.append(fits)
    for unsorted, by_sort in forests:
        for t in range(unsorted.trees):
            a, b = unsorted.tree(t), by_sort.tree(t)
            for name in ("feature", "threshold", "value", "cases", "impurity_decrease", "missing_left",
                         "category_left"):
                np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
