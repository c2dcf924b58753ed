"""The many-class (3 to 8 classes) Gini and entropy search against references written here.

References: the brute-force exact CART of ``test_exact_cart.py`` (Breiman, Friedman, Olshen & Stone 1984,
*Classification and Regression Trees*: every split of every feature scored one by one, forestlab's
documented tie rule restated independently); a Python loop for each element's weight of its own class
before it in its segment (the definition); the leading eigenvector from ``numpy.linalg.eigh`` (LAPACK) for
the category order's principal axis (Coppersmith, Hong & Hosking 1999 order categories by it).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from test_exact_cart import assert_tree_is_brute_force_cart, brute_force_tree

import forestlab as fl
from forestlab.engine import class_ranks as _class_ranks
from forestlab.engine import many_class as _many_class
from forestlab.engine.principal_axis import projections


@st.composite
def many_class_problems(draw):
    """3 to 8 classes, numeric features without gaps: distinct values or a few levels (ties), any
    ``min_leaf``, with or without replacement."""
    classes = draw(st.integers(3, 8))
    n = draw(st.integers(classes, 40))
    p = draw(st.integers(1, 4))
    if draw(st.booleans()):
        X = np.array([draw(st.permutations(range(n))) for _ in range(p)], dtype=float).T * 0.37
    else:
        X = np.array(draw(st.lists(st.lists(st.integers(0, draw(st.integers(1, 6))), min_size=p, max_size=p),
                                   min_size=n, max_size=n)), dtype=float)
    y = np.array(draw(st.lists(st.integers(0, classes - 1), min_size=n, max_size=n)))
    kind = draw(st.sampled_from(["gini", "entropy"]))
    return (X, y, kind, draw(st.sampled_from([1, 1, 2, 3])), draw(st.booleans()),
            draw(st.sampled_from([None, None, 2])), draw(st.integers(0, 2**16)))


@settings(max_examples=300, deadline=None)
@given(many_class_problems())
def test_many_class_tree_equals_brute_force_cart(problem):
    assert_tree_is_brute_force_cart(*problem)


@settings(max_examples=100, deadline=None)
@given(many_class_problems(), st.lists(st.sampled_from([0.5, 1.0, 2.25, 3.0]), min_size=40, max_size=40))
def test_weighted_many_class_tree_equals_brute_force_cart(problem, case_weights):
    """Case weights make the sums floating-point: the generic search serves them, still exactly."""
    X, y, kind, min_leaf, replace, depth_limit, seed = problem
    weights = np.array(case_weights[:len(y)])
    forest = fl.Forest(trees=1, sampler=fl.AllFeatures(), splitter=kind, min_leaf=min_leaf, sample_size=len(y),
                       replace=replace, depth_limit=depth_limit, rng=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", fl.SingleClassWarning)
        forest.fit(X, y, weights=weights)
    tree = forest.tree(0)
    target = np.unique(y, return_inverse=True)[1]
    ref = brute_force_tree(X, target, forest.inbag[0] * weights, forest.splitter, forest.classes.size, min_leaf,
                           depth_limit)
    np.testing.assert_array_equal(tree.feature, ref["feature"])
    np.testing.assert_array_equal(tree.threshold, ref["threshold"])
    np.testing.assert_array_equal(tree.left, ref["left"])
    np.testing.assert_allclose(tree.cases, ref["cases"], rtol=1e-6)  # stored as float32
    np.testing.assert_array_equal(tree.value, ref["value"])


@pytest.mark.parametrize("kind", ["gini", "entropy"])
@pytest.mark.parametrize("ties", [False, True])
def test_the_many_class_search_serves_unweighted_fits(monkeypatch, kind, ties):
    """The problems above take the many-class search (so their check is not vacuous), and with case
    weights they do not."""
    calls = []
    for name in ("class_ranks", "class_weight_through"):  # (Gini without ties: the second, over the runs)
        original = getattr(_class_ranks, name)
        monkeypatch.setattr(_many_class, name, lambda *a, original=original: calls.append(1) or original(*a))
    rng = np.random.default_rng(5)
    X = rng.normal(size=(90, 3))
    X = np.round(X) if ties else X
    y = np.argmax(X @ rng.normal(size=(3, 5)) + rng.normal(size=(90, 5)), axis=1)
    fl.Forest(trees=2, splitter=kind, rng=0).fit(X, y)
    assert calls
    calls.clear()
    fl.Forest(trees=2, splitter=kind, rng=0).fit(X, y, weights=np.full(90, 0.5))
    assert not calls


@given(st.lists(st.tuples(st.integers(0, 4), st.integers(0, 3), st.integers(1, 3)), min_size=1, max_size=60))
def test_class_ranks_are_the_weight_of_the_own_class_before(elements):
    """``before[e]``: the summed weight of the earlier elements of the same segment and class."""
    cand = np.sort(np.array([c for c, _, _ in elements]))
    y = np.array([k for _, k, _ in elements])
    w = np.array([v for _, _, v in elements])
    expected = [sum(w[j] for j in range(e) if cand[j] == cand[e] and y[j] == y[e]) for e in range(len(y))]
    np.testing.assert_array_equal(_class_ranks.class_ranks(w, y, cand, 4), expected)


@given(st.lists(st.tuples(st.integers(0, 3), st.integers(0, 4), st.integers(1, 300)), min_size=1, max_size=60),
       st.integers(1, 4))
def test_class_weight_through_is_the_weight_of_the_own_class_up_to_each_run(runs, features):
    """The weight of a run's class in its segment up to and including the run, from the node sums: every
    node's items appear once in each of its ``features`` segments (runs here: (node, class, weight) in node
    order, repeated per segment)."""
    runs = sorted(runs, key=lambda r: r[0])
    nodes, classes = 4, 5
    node_class = np.zeros((nodes, classes), dtype=np.int64)
    for node, k, v in runs:
        node_class[node, k] += v
    ncand = np.array([features if any(r[0] == node for r in runs) else 0 for node in range(nodes)])
    rows = [(node, j, k, v) for node in range(nodes) for j in range(ncand[node]) for r, k, v in runs if r == node]
    node, place, y, w = (np.array(c) for c in zip(*rows))
    cand = node * features + place
    expected = [sum(w[i] for i in range(e + 1) if cand[i] == cand[e] and y[i] == y[e]) for e in range(len(y))]
    cell = y * nodes + node  # class-major
    by_class = node_class.T.ravel()
    got = _class_ranks.class_weight_through(w, y, cell, place, by_class[cell], by_class, ncand, classes)
    np.testing.assert_array_equal(got, expected)


def test_principal_axis_follows_the_leading_eigenvector():
    """Where the leading eigenvalue stands clear of the next (a factor 4 or more), the scores are the
    projections on the eigenvector ``numpy.linalg.eigh`` finds, up to a positive factor (12 power
    iterations leave the next direction at ``4**-12``, 6e-8, of the first)."""
    rng = np.random.default_rng(7)
    checked = 0
    for k, K in [(4, 6), (8, 5), (6, 6)]:
        weight = rng.integers(0, 5, size=(200, k)).astype(float)
        centred = rng.normal(size=(200, k, K)) * np.linspace(4, 0.5, K)
        scores = projections(weight, centred)
        cov = np.einsum("ck,cki,ckj->cij", weight, centred, centred)
        values, vectors = np.linalg.eigh(cov)
        clear = values[:, -1] > 4 * values[:, -2]
        reference = np.einsum("cki,ci->ck", centred, vectors[:, :, -1])
        for c in np.flatnonzero(clear):
            ratio = np.dot(scores[c], reference[c]) / np.dot(reference[c], reference[c])
            np.testing.assert_allclose(np.abs(scores[c]), np.abs(ratio) * np.abs(reference[c]), rtol=1e-6,
                                       atol=1e-9 * np.abs(reference[c]).max())
            checked += 1
    assert checked > 100


@pytest.mark.parametrize("kind, categorical", [("gini", None), ("entropy", None), ("gini", [0, 1, 2])])
def test_many_class_forests_do_not_depend_on_the_batch(monkeypatch, kind, categorical):
    """forestlab's rule (a tree never depends on the trees grown beside it), for the many-class search and
    the category order's power iterations: batches of 1 and of 40 trees give the same forest."""
    import forestlab._fitting as fitting
    from test_reproducibility import assert_same_forest
    rng = np.random.default_rng(11)
    X = rng.integers(0, 6, size=(120, 4)).astype(float) + (0 if categorical else rng.normal(size=(120, 4)))
    y = np.argmax(X @ rng.normal(size=(4, 6)) + 2 * rng.normal(size=(120, 6)), axis=1)
    monkeypatch.setattr(fitting, "BATCH_ITEMS", 10**9)
    forests = []
    for size in (1, 40):
        monkeypatch.setattr(fitting, "MAX_BATCH", size)
        forests.append(fl.Forest(trees=40, splitter=kind, categorical=categorical, rng=4).fit(X, y))
    assert_same_forest(*forests)


@settings(max_examples=60, deadline=None)
@given(many_class_problems())
def test_gini_over_the_runs_with_int64_sums_equals_brute_force_cart(problem):
    """Nodes heavier than ``many_class._NARROW_WEIGHT`` (46 340: squared class weights past int32) sum ``Q``
    in int64: forced here for every node, the trees are still the brute-force CART trees (the default,
    int32 sums, is checked by the test above)."""
    saved = _many_class._NARROW_WEIGHT
    _many_class._NARROW_WEIGHT = 0
    try:
        assert_tree_is_brute_force_cart(*problem)
    finally:
        _many_class._NARROW_WEIGHT = saved


def test_the_runs_search_serves_tie_free_gini(monkeypatch):
    """The test above is not vacuous: a tie-free Gini fit at ``min_leaf`` 1 scores over the runs, and with
    every node in int64 the forest is the same as with int32 sums."""
    calls = []
    original = _many_class.gini_class_changes
    monkeypatch.setattr(_many_class, "gini_class_changes", lambda *a: calls.append(1) or original(*a))
    rng = np.random.default_rng(8)
    X = rng.normal(size=(300, 4))
    y = np.argmax(X @ rng.normal(size=(4, 6)) + rng.normal(size=(300, 6)), axis=1)
    narrow = fl.Forest(trees=4, rng=2).fit(X, y)
    assert calls
    monkeypatch.setattr(_many_class, "_NARROW_WEIGHT", 0)
    wide = fl.Forest(trees=4, rng=2).fit(X, y)
    from test_reproducibility import assert_same_forest
    assert_same_forest(narrow, wide)


@given(st.lists(st.tuples(st.integers(0, 3), st.integers(0, 4), st.integers(1, 300)), min_size=1, max_size=60),
       st.integers(1, 4))
def test_cell_weight_through_is_the_weight_of_the_own_class_up_to_each_run(runs, features):
    """As above, from the (class, candidate) table: brute force, summing the earlier runs of the same
    segment and class."""
    runs = sorted(runs, key=lambda r: r[0])
    classes = 5
    present = sorted({node for node, _, _ in runs})
    rows = [(node, j, k, v) for node in present for j in range(features) for r, k, v in runs if r == node]
    node, place, y, w = (np.array(c) for c in zip(*rows))
    cand = np.searchsorted(present, node) * features + place
    C = len(present) * features
    cell_weight = np.zeros((classes, C), dtype=np.int64)  # the class's weight in the candidate's node
    for c in range(C):
        for r, k, v in runs:
            if r == present[c // features]:
                cell_weight[k, c] += v
    expected = [sum(w[i] for i in range(e + 1) if cand[i] == cand[e] and y[i] == y[e]) for e in range(len(y))]
    got = _class_ranks.cell_weight_through(w, y, y * C + cand, cell_weight.ravel(), classes)
    np.testing.assert_array_equal(got, expected)
