"""The numeric partition (``grow._partition_blocks``) against its definition, written here: an item of a
split node goes to the node's left child when its dense rank of the split feature is at most the cut's rank,
else to the right one (left + 1); items of unsplit nodes are dropped, the others keep their order.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from forestlab.engine import grow
from forestlab.engine.elements import Items


@pytest.mark.parametrize("block", [5, 1 << 16])
@pytest.mark.parametrize("dtype", [np.uint16, np.int32])
def test_children_by_rank_against_the_cut(monkeypatch, block, dtype):
    monkeypatch.setattr(grow, "_PARTITION_BLOCK", block)
    rng = np.random.default_rng(5)
    n, p, nodes = 300, 4, 9
    top = np.iinfo(dtype).max  # the largest rank the table can hold, at and around the cuts
    dense = rng.integers(top - 40, top, size=(p, n), endpoint=True).astype(dtype)
    row = np.sort(rng.choice(n, size=200, replace=False)).astype(np.int64)
    node = rng.integers(0, nodes, size=row.size)
    found = rng.random(nodes) < 0.7
    found[0] = True
    feature = np.where(found, rng.integers(0, p, size=nodes), -1)
    cut = np.where(found, rng.integers(top - 41, top, size=nodes, endpoint=True), -1)  # every side, empty too
    left = np.where(found, 2 * (found.cumsum() - 1), 0)
    splits = SimpleNamespace(found=found, feature=feature, cut_rank=cut.astype(np.int64))
    data = SimpleNamespace(dense=dense, rows=n)
    for wi in (row, row + 7 * n):  # one tree (the same array) and several
        out = grow._partition_blocks(data, Items(row, node, wi if wi is row else wi.copy()), splits, left)
        kept = [i for i in range(row.size) if found[node[i]]]
        expected = [left[node[i]] + int(int(dense[feature[node[i]], row[i]]) > cut[node[i]]) for i in kept]
        np.testing.assert_array_equal(out.node, expected)
        np.testing.assert_array_equal(out.row, row[kept])
        np.testing.assert_array_equal(out.wi, wi[kept])
        assert (out.wi is out.row) == (wi is row)
