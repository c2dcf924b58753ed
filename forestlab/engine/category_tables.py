"""An all-categorical many-class Gini level without the sort: the run tables from the unsorted pairs.

:mod:`.run_gini` scores the cuts of a level whose candidates are all categorical from each candidate's runs
(one per present category) alone: their class weights and element counts, in (candidate, code) order. Those
need no sorted elements: one ``bincount`` of every (item, candidate of its node) pair's cell ``candidate * k
+ code`` counts the elements of every run (the present cells are the runs, in the order the sort would give
them) and a second, over ``run * K + class`` weighted by the bootstrap counts, gives their class weights. The
segments' bounds come from the nodes' item counts as in :func:`.segments.sorted_segments`; no keys are
sorted, no rows gathered. Every sum is an integer, so the tables, orders and scores are those of the sorted
path bit for bit. Applies where dense ranks are codes (every code present: the intake's coding), so the left
sets are written from the ranks.
"""

from __future__ import annotations

import numpy as np

from .category_runs import CategoryRunsPath, _ordered
from .run_gini import run_gini_splits
from .elements import Items, Segments
from .segments import pair_keys
from .workspace import Workspace

__all__ = ["unsorted_gini_splits"]


def unsorted_gini_splits(path: CategoryRunsPath, splitter, min_leaf: float, lightest: float, items: Items, node_tree,
                         mask, cand, parent, out, tie: float, work: Workspace | None):
    """Fill ``out`` with the best split of every node (``path.sorts_nothing(cand)`` holds)."""
    data = path.data
    p, K = data.features, data.classes
    nodes = mask.shape[0]
    cand_node, cand_feat = np.divmod(cand, p)
    ncand = np.bincount(cand_node, minlength=nodes)
    first = np.cumsum(ncand) - ncand
    size = np.bincount(items.node, minlength=nodes)[cand_node]
    start = np.cumsum(size) - size
    seg = Segments(cand_node, cand_feat, node_tree[cand_node], start, size, first[ncand > 0], None, None, None,
                   items, data, 0)
    packed = np.take(path.columns[0], items.wi, mode="clip")  # the level's items' count | class << 8
    item_class = packed >> 8
    node_class = np.bincount(items.node * K + item_class, weights=packed & 0xFF,
                             minlength=nodes * K).astype(np.int64).reshape(nodes, K)
    k = int(data.categories.max())
    cell, pair_item = _pair_cells(data, items, cand_feat, ncand, first, k, work)
    count = np.bincount(cell, minlength=cand.size * k)
    present = np.flatnonzero(count)  # the runs, in (candidate, code) order
    index = np.take(np.cumsum(count > 0) - 1, cell, mode="clip")
    index *= K
    weight = (packed & 0xFF).astype(np.float64)
    if pair_item is None:  # slot-major pairs: the items repeated per slot
        index.reshape(-1, packed.size)[:] += item_class
        weights = np.broadcast_to(weight, (index.size // packed.size, packed.size)).ravel()
    else:
        index += item_class[pair_item]
        weights = weight[pair_item]
    by_class = np.bincount(index, weights=weights, minlength=present.size * K).reshape(present.size, K)
    run_size = count[present]
    run_start = np.cumsum(run_size) - run_size
    cat = np.arange(present.size)
    runs = _ordered(seg, run_start, run_size, cat, present // k, present % k, by_class, node_class, None)
    return run_gini_splits(seg, runs, splitter, min_leaf, lightest, node_class, parent, out, tie, work)


def _pair_cells(data, items: Items, cand_feat, ncand, first, k: int, work: Workspace | None):
    """``candidate * k + code`` of every (item, candidate of its node) pair, and the item of every pair (None
    when the pairs are slot-major): :func:`.segments.pair_keys`' codes ``candidate << dense_bits | code``
    without an item, re-based to ``k`` cells a candidate."""
    code, pair_item = pair_keys(data, items, cand_feat, ncand, first, 0, work)
    spare = code >> data.dense_bits  # the candidate
    spare *= (1 << data.dense_bits) - k
    code -= spare
    return code, pair_item
