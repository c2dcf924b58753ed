"""The level's sorted segments against a reference written here with ``np.lexsort``.

Every (node, candidate feature) segment must list the node's items by increasing value of the feature
(exact CART needs every node's cases in feature order; Breiman et al. 1984, chapter 4), ties in item order,
and a cut may lie only between distinct values.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import forestlab as fl
from forestlab.engine.elements import Items
from forestlab.engine.segments import sorted_segments


def level(n, p, nodes, seed, rounding=None):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    if rounding is not None:
        X = np.round(X, rounding)
    forest = fl.Forest(trees=1, rng=0).fit(X, (X[:, 0] > 0).astype(int))
    row = np.sort(rng.choice(n, size=int(0.63 * n), replace=False))
    node = np.sort(rng.integers(0, nodes, row.size))  # nodes need not be contiguous in the items: shuffle rows
    order = rng.permutation(row.size)
    row, node = row, node[order]
    items = Items(row, node, row.copy())
    mask = np.zeros((nodes, p), dtype=bool)
    for k in range(nodes):
        mask[k, rng.choice(p, size=min(3, p), replace=False)] = True
    return forest._data, items, mask, X


@pytest.mark.parametrize("n, p, nodes, rounding, by_position", [
    (70_000, 4, 1, None, False), (70_000, 4, 37, 1, False), (300, 6, 9, 0, False), (300, 6, 9, 0, True),
    (3_000, 5, 12, None, True), (3_000, 5, 12, None, False)])
@pytest.mark.parametrize("mode", ["numpy", "radix", "radix, eager"])
def test_segments_are_each_node_sorted_by_value_ties_in_item_order(monkeypatch, n, p, nodes, rounding, by_position,
                                                                   mode):
    """Both the 64-bit keys and (where every candidate feature is tie-free and the table of rows in
    value order exists) the 32-bit codes read back through that table, each sorted by ``np.sort`` and by the
    radix sort of :mod:`forestlab.engine.key_sort` (its items and ordered codes formed when read, or, as on
    large levels, at once)."""
    from forestlab.engine import key_sort, segments

    if mode == "radix, eager":
        mode = "radix"
        monkeypatch.setattr(segments, "LAZY_ELEMENTS", 0)
    monkeypatch.setattr(key_sort, "MODE", mode)
    monkeypatch.setattr(key_sort, "RADIX_MIN", 1)
    data, items, mask, X = level(n, p, nodes, seed=n + nodes, rounding=rounding)
    cand = np.flatnonzero(mask)
    seg = sorted_segments(data, items, np.zeros(nodes, dtype=np.int64), mask, cand, by_position=by_position)
    assert seg.by_item != (by_position and rounding is None and mode == "numpy")  # which path ran
    expected, no_cut = [], []
    for c in cand:  # reference: per candidate, lexsort by (value, item)
        k, j = divmod(c, p)
        mine = np.flatnonzero(items.node == k)
        values = X[items.row[mine], j]
        ordered = mine[np.lexsort((mine, values))]
        expected.append(ordered)
        no_cut.append(np.append(X[items.row[ordered[1:]], j] == X[items.row[ordered[:-1]], j], True))
    expected = np.concatenate(expected)
    if seg.by_item:  # what the searches read before any item is formed (the radix path forms them when read)
        some = np.unique(np.random.default_rng(1).integers(0, expected.size, 50))
        np.testing.assert_array_equal(seg.items_at(some), expected[some])
        values = np.random.default_rng(2).normal(size=items.row.size) * (1 + 1j)
        np.testing.assert_array_equal(seg.item_values(values, np.empty(expected.size, complex)), values[expected])
        np.testing.assert_array_equal(seg.cand_of, np.repeat(np.arange(cand.size), seg.size))
    if not seg.by_item:
        np.testing.assert_array_equal(seg.row, items.row[expected])
        np.testing.assert_array_equal(seg.wi, items.wi[expected])
    else:
        np.testing.assert_array_equal(seg.item, expected)
    ref_no_cut = np.concatenate(no_cut)
    ref_no_cut[-1] = True
    inner = np.ones(expected.size, dtype=bool)
    inner[seg.start[1:] - 1] = False  # the last element of each segment is decided by the search
    inner[-1] = False
    if seg.no_cut is None:  # tie-free candidates: no equal neighbours within a segment
        assert rounding is None and not ref_no_cut[inner].any()
    else:
        np.testing.assert_array_equal(seg.no_cut[inner], ref_no_cut[inner])
    np.testing.assert_array_equal(seg.cand_of, np.repeat(np.arange(cand.size), seg.size))
    if seg.code.dtype != np.int64:  # (int64 codes hold the candidates now: formed in their place)
        np.testing.assert_array_equal(seg.code >> seg.code_shift, seg.cand_of)
        assert np.all(seg.code[1:] >= seg.code[:-1])  # the codes in order when read


@settings(max_examples=60, deadline=None)
@given(st.lists(st.integers(1, 120), min_size=1, max_size=8), st.sampled_from([1.0, 0.3, 0.75]),
       st.sampled_from([2.0, 5.0, 7.5]), st.integers(0, 2**16))
def test_light_cuts_match_their_definition(sizes, lightest, min_leaf, seed):
    """A cut is excluded where either side weighs less than min_leaf (Breiman et al. 1984, minimum node
    size); the search checks only the elements near segment ends when segments are long. Reference: the
    definition applied to every element, with running sums written here."""
    from types import SimpleNamespace

    from forestlab.engine.cuts import light_cuts

    rng = np.random.default_rng(seed)
    size = np.array(sizes)
    start = np.cumsum(size) - size
    w = lightest * rng.choice([1.0, 1.0, 2.0, 3.0], size=size.sum())
    left = np.concatenate([np.cumsum(w[a:a + k]) for a, k in zip(start, size)])
    right = np.repeat(np.add.reduceat(w, start), size) - left
    seg = SimpleNamespace(start=start, size=size)
    light = light_cuts(seg, left, right, min_leaf, lightest)
    found = np.zeros(w.size, dtype=bool)
    if light is not None:
        found[light] = True  # a mask over all elements, or the elements themselves
    np.testing.assert_array_equal(found, np.minimum(left, right) < min_leaf)


@pytest.mark.parametrize("segments, mean_size", [(3, 90_000), (2_000, 100), (40_000, 5), (50, 30), (9, 1)])
def test_segment_totals_spread_every_total_over_its_segment(segments, mean_size):
    """Against ``np.repeat`` (the definition): every branch (plain repeat on small levels, repeat a few
    ten thousand elements at a time into a buffer on large ones, gather by candidate for short segments)."""
    from types import SimpleNamespace

    from forestlab.engine.cuts import segment_totals

    rng = np.random.default_rng(segments)
    size = rng.integers(1, 2 * mean_size, segments)
    size[rng.integers(0, segments)] = 2 * mean_size + 70_000 if segments > 3 else size[0]  # one long segment
    start = np.cumsum(size) - size
    total = rng.integers(-2**40, 2**40, segments)
    seg = SimpleNamespace(start=start, size=size, elements=int(size.sum()),
                          cand_of=np.repeat(np.arange(segments), size))
    for out in (None, np.full(size.sum(), 7, dtype=np.int64)):
        np.testing.assert_array_equal(segment_totals(seg, total, None, out), np.repeat(total, size))


def test_packed_sums_at_class_changes_equal_restarted_running_sums(monkeypatch):
    """The two-class search's sums at the class changes, from one cumsum over the level, are the running
    sums restarted per segment (the path large levels take): the same trees bit for bit."""
    from forestlab.engine import fast_search as _fast_search
    rng = np.random.default_rng(11)
    X = rng.normal(size=(1_500, 6))
    y = (X[:, 0] + X[:, 1] * X[:, 2] + rng.normal(scale=0.5, size=1_500) > 0).astype(int)

    def grown():
        forest = fl.Forest(trees=5, sampler=2, rng=4).fit(X, y)
        return [forest.tree(b) for b in range(5)]

    packed = grown()
    monkeypatch.setattr(_fast_search, "_PACKED_LEVEL_LIMIT", 0)
    restarted = grown()
    for a, b in zip(packed, restarted):
        np.testing.assert_array_equal(a.feature, b.feature)
        np.testing.assert_array_equal(a.threshold, b.threshold)
        np.testing.assert_array_equal(a.cases, b.cases)


@pytest.mark.parametrize("block", [7, 1 << 16])
@pytest.mark.parametrize("item_bits", [0, 12])
def test_pair_keys_match_their_definition_block_by_block(monkeypatch, block, item_bits):
    """Every (item, candidate of its node) pair's key is ``(candidate << dense_bits | dense rank) << item_bits
    | item`` (the packing written here, per pair, from its definition), whatever the block of items the
    slot-major build takes at a time (a block of 7 items puts block edges inside nodes and slots)."""
    from forestlab.engine import segments

    monkeypatch.setattr(segments, "_GATHER_BLOCK", block)
    data, items, mask, _ = level(3_000, 6, 11, seed=4)
    cand = np.flatnonzero(mask)
    cand_node, cand_feat = np.divmod(cand, data.features)
    ncand = np.bincount(cand_node, minlength=mask.shape[0])
    first = ncand.cumsum() - ncand
    key, pair_item = segments.pair_keys(data, items, cand_feat, ncand, first, item_bits)
    assert pair_item is None  # every node has three candidates: slot-major pairs
    N, m = items.row.size, 3
    expected = np.empty((m, N), dtype=np.int64)
    for i in range(N):
        for j in range(m):
            c = first[items.node[i]] + j
            rank = int(data.dense[cand_feat[c], items.row[i]])
            expected[j, i] = ((int(c) << data.dense_bits | rank) << item_bits) | (i if item_bits else 0)
    np.testing.assert_array_equal(key, expected.ravel())
