"""Level-synchronous growth of exact CART trees, a batch of trees at a time.

See ``forestlab/ENGINE.md`` for the array shapes and invariants. In short: an *item* is one in-bag
(tree, row) pair; at every level all open nodes of all trees in the batch are searched together by sorting
packed integer keys (candidate, dense rank, item), so the only Python loops are over levels and (for the random
draws and the running sums) over the trees of the batch.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .bootstrap import draw_counts
from .fast_search import FastPath, fast_path
from .level_blocks import level_best_splits
from .presort import TrainingData
from .sampler import CandidateSampler, TreeGenerators, draw_masks
from .search import Items, Splits, checked_impurity
from .splitter import CartSplitter
from .tree import NODE_STORAGE, Tree, goes_right
from .workspace import Workspace

__all__ = ["GrowthRules", "grow_batch"]

@dataclass(frozen=True)
class GrowthRules:
    """The settings every tree of a forest is grown with (all validated and resolved)."""

    sampler: CandidateSampler
    splitter: CartSplitter
    min_leaf: float
    depth_limit: int | None
    sample_size: int
    replace: bool


class _Batch:
    """The in-bag counts of a batch of trees, their statistics for the search, and scratch buffers.

    ``stats`` (channel-major, ``stats[c, slot * n + row]`` = count times the case's weighted statistics) is
    formed only when the generic search or summaries ask for it.
    """

    def __init__(self, data: TrainingData, counts: NDArray[np.uint8], splitter: CartSplitter,
                 work: Workspace) -> None:
        self.data, self.counts, self.work = data, counts, work
        self.fast: FastPath | None = fast_path(data, splitter, counts)  # a specialised search, if one applies
        weighted = counts > 0 if data.weights is None else (counts > 0) & (data.weights > 0)
        self.rows = [np.flatnonzero(drawn) for drawn in weighted]  # in-bag cases of positive weight per tree
        # smallest positive weight of a drawn case; a min_leaf at most this needs no weight checks
        self.lightest = 1.0 if data.weights is None or not weighted.any() else \
            float((counts * data.weights)[weighted].min())

    @functools.cached_property
    def stats(self) -> NDArray[np.float64]:
        data, counts = self.data, self.counts
        return (data.stats.T[:, None, :] * counts[None, :, :]).reshape(data.stats.shape[1], -1)


def grow_batch(data: TrainingData, rules: GrowthRules, seeds: list[np.random.SeedSequence],
               work: Workspace | None = None) -> tuple[list[Tree], NDArray[np.uint8]]:
    """Grow one tree per seed; returns the trees and their in-bag counts, shape ``(len(seeds), n)``.

    Each tree draws its bootstrap sample first and then, level by level, its candidate features, only from
    its own generator; every sum is taken within one tree, so a tree does not depend on its batch. ``work``
    lends scratch buffers that batches grown one after another may share.
    """
    gens = TreeGenerators(np.random.default_rng(s) for s in seeds)  # (RandomSubset's keys drawn ahead)
    n = data.rows
    counts = np.stack([draw_counts(g, n, rules.sample_size, rules.replace, data.strata) for g in gens])
    subspace = _tree_masks(rules.sampler, gens, data.features)
    batch = _Batch(data, counts, rules.splitter, Workspace() if work is None else work)
    rows = batch.rows
    empty = [b for b, r in enumerate(rows) if r.size == 0]
    if empty:
        raise ValueError(f"the bootstrap sample of tree {seeds[empty[0]].spawn_key[-1]} holds only cases of "
                         "weight 0; give more cases a positive weight")
    slot = np.repeat(np.arange(len(gens)), [r.size for r in rows])
    row = rows[0] if len(rows) == 1 else np.concatenate(rows)  # (one tree: no copy of its rows)
    del rows, batch.rows
    items = Items(row, slot, row if len(gens) == 1 else slot * n + row)
    del row, slot  # (held by the items only, so a level can release them)
    node_tree = np.arange(len(gens))
    records: list[dict[str, NDArray]] = []
    depth, sides = 0, None
    while node_tree.size:
        level, items, node_tree, sides = _grow_level(data, rules, gens, subspace, batch, items, node_tree, depth,
                                                     sides)
        records.append(level)
        depth += 1
    return _collect(records, len(gens)), counts


def _tree_masks(sampler: CandidateSampler, gens: list[np.random.Generator],
                features: int) -> NDArray[np.bool_] | None:
    """One candidate mask per tree for a per-tree sampler, drawn before any level."""
    if not sampler.per_tree:
        return None
    return draw_masks(sampler, gens, np.ones(len(gens), dtype=np.int64), features)


def _grow_level(data, rules, gens, subspace, batch, items, node_tree, depth, sides=None):
    """Summarise, search and partition every open node of one level; ``sides`` are the nodes' sums as the
    fast search of their parents found them (None: sum them here). Returns the level's record, the next
    level's items and node trees, and the sums of its nodes (None where no fast search ran)."""
    K = node_tree.size
    if batch.fast is not None:  # the same sums whether the parents' cuts give them or the items do
        sides = batch.fast.sides(items, K) if sides is None else sides
        weight, totals, value, pure = batch.fast.summaries(data, items, K, sides)
    else:
        weight, totals, value, pure = _node_summaries(data, batch, items, K)
    closed = pure | (weight < 2 * rules.min_leaf)
    if rules.depth_limit is not None and depth >= rules.depth_limit:
        closed[:] = True
    open_nodes = (~closed).nonzero()[0]
    if open_nodes.size < K:  # from here on the items of the open nodes only: no second copy of the level's items
        _narrow(items, ~closed)
    if type(batch.fast) is FastPath:  # the open nodes' items, as their parents' cuts (or the items) counted them
        items.size = sides[open_nodes, 2].astype(np.int64)
    if open_nodes.size:  # (the open nodes' splits, numbered among them)
        found = _search_open(data, rules, gens, subspace, batch, items, node_tree, totals, weight, open_nodes)
    else:
        found = Splits.none(0, data.category_words)
    if open_nodes.size == K:
        splits = found
    else:
        splits = Splits.none(K, data.category_words)
        splits.update(open_nodes, found)
    # breadth-first numbering: the children of a tree's j-th inner node are its nodes 2j+1 and 2j+2 (Tree.left)
    record = {
        "tree": node_tree, "feature": np.where(splits.found, splits.feature, -1),
        "threshold": np.where(splits.found, splits.threshold, np.nan), "value": value,
        "cases": weight, "decrease": np.where(splits.found, splits.decrease, 0.0),
        "missing_left": splits.missing_left & splits.found, "category_left": splits.category_left,
    }
    next_items = _partition(data, items, found, (2 * (splits.found.cumsum() - 1))[open_nodes])
    inner = splits.found.nonzero()[0]
    sides = None if batch.fast is None else splits.sides[inner].reshape(-1, 3)
    return record, next_items, node_tree[inner].repeat(2), sides


def _node_summaries(data: TrainingData, batch, items: Items, K: int):
    """Per node: case weight, summed statistics, leaf value and whether all targets are equal."""
    item_stats = np.take(batch.stats, items.wi, axis=1, mode="clip")
    totals = np.stack([np.bincount(items.node, weights=channel, minlength=K) for channel in item_stats], axis=1)
    weight = totals[:, 0]
    y = data.target[items.row]
    if data.classes and totals.shape[1] == 1 + data.classes:
        value = np.argmax(totals[:, 1:], axis=1).astype(np.float64)
    elif data.classes:
        by_class = np.bincount(items.node * data.classes + y, weights=item_stats[0],
                               minlength=K * data.classes).reshape(K, data.classes)
        value = np.argmax(by_class, axis=1).astype(np.float64)
    else:
        value = np.bincount(items.node, weights=item_stats[0] * y, minlength=K) / weight
    return weight, totals, value, data.equal_targets(items.row, items.node, K)


def _search_open(data, rules, gens, subspace, batch, sub_items, node_tree, totals, weight, open_nodes):
    """Best split of every open node (``sub_items``: their items, numbered among them); per-node samplers fall
    back to the other features if none splits."""
    sub_tree = node_tree[open_nodes]
    mask = _level_mask(rules.sampler, gens, subspace, sub_tree, data.features)
    parent = weight[open_nodes] * checked_impurity(rules.splitter, totals[open_nodes])
    search = (data, rules.splitter, rules.min_leaf, batch)
    kind = None if batch.fast is None else batch.fast.kind
    means = totals[open_nodes, 1] / weight[open_nodes] if kind == "squared_error" else None
    if kind == "many_class":  # (the nodes' class weights, as the summaries summed them)
        means = totals[open_nodes, 1:]
    splits = level_best_splits(*search, sub_items, sub_tree, mask, parent, means)
    if rules.sampler.per_tree or splits.found.all():
        return splits
    # the nodes without a split, numbered among themselves (every one then has the same number of
    # candidates under RandomSubset, which keeps the search on its fast whole-array path)
    todo = np.flatnonzero(~splits.found)
    again = level_best_splits(*search, _items_of(sub_items, ~splits.found), sub_tree[todo], ~mask[todo],
                              parent[todo], None if means is None else means[todo])
    splits.update(todo[again.found], again, again.found)
    return splits


def _items_of(items: Items, keep: NDArray[np.bool_]) -> Items:
    """The items of the nodes where ``keep`` is True, those nodes numbered among themselves in order."""
    subset = Items(items.row, items.node, items.wi)
    _narrow(subset, keep)
    return subset


def _narrow(items: Items, keep: NDArray[np.bool_]) -> None:
    """:func:`_items_of` in place: ``items`` holds afterwards only the items of the nodes where ``keep`` is
    True, those nodes numbered among themselves (the arrays it held are released one by one)."""
    kept = keep.take(items.node, mode="clip").nonzero()[0]
    items.size = None  # (the nodes are numbered anew)
    one = items.wi is items.row  # (one tree: the same array)
    items.row = items.row.take(kept, mode="clip")  # one array at a time, each released once replaced
    items.wi = items.row if one else items.wi.take(kept, mode="clip")
    items.node = items.node.take(kept, mode="clip")
    del kept
    items.node = (keep.cumsum() - 1).take(items.node, mode="clip")


def _level_mask(sampler, gens, subspace, sub_tree, features: int) -> NDArray[np.bool_]:
    """Candidate masks of the open nodes, each tree drawing from its own generator."""
    if subspace is not None:
        return subspace[sub_tree]
    return draw_masks(sampler, gens, np.bincount(sub_tree, minlength=len(gens)), features)


def _partition(data: TrainingData, items: Items, splits: Splits, left_child: NDArray[np.int64]) -> Items:
    """Send the items of split nodes to their children (order within each tree kept); ``splits`` and
    ``left_child`` (each node's left child in the next level) are indexed by ``items.node``. Numeric data
    without gaps: :func:`_partition_blocks`."""
    if not (data.missing or data.category_words):
        return _partition_blocks(data, items, splits, left_child)
    found = splits.found
    kept = items if found.all() else items.take(found.take(items.node, mode="clip").nonzero()[0])
    row, node = kept.row, kept.node
    go_right = goes_right(data.X, row, node, splits.feature, splits.threshold, splits.missing_left,
                          splits.category_left, data.missing)
    return Items(row, left_child.take(node, mode="clip") + go_right, kept.wi)


def _partition_blocks(data: TrainingData, items: Items, splits: Splits, left_child: NDArray[np.int64]) -> Items:
    """:func:`_partition` of numeric items without gaps, ``_PARTITION_BLOCK`` items at a time: an item goes
    right when its dense rank is above the cut's (the node's values lie on either side of it). The items of
    unsplit nodes are dropped block by block and the children written in place, so a level makes no
    level-sized temporaries (a level-sized partition held the peak memory of a million-row regression fit,
    issue 17); integer arithmetic, so the same children however the blocks fall. An item's child is one sum
    and a shift (:func:`_child_tables`): two gathers by node, not three, and no comparison."""
    found = splits.found
    keep = None if found.all() else found.take(items.node, mode="clip")
    one = items.wi is items.row
    if keep is None:  # (every node split: the rows and statistics indices as they are)
        row, wi, child = items.row, items.wi, np.empty(items.row.size, dtype=np.int64)
    else:
        size = int(np.count_nonzero(keep))
        row, child = np.empty(size, dtype=items.row.dtype), np.empty(size, dtype=np.int64)
        wi = row if one else np.empty(size, dtype=items.wi.dtype)
    (base, high), dense, at = _child_tables(data, splits, left_child), data.dense.ravel(), 0
    index = np.empty(min(items.row.size, _PARTITION_BLOCK), dtype=np.int64)
    for lo in range(0, items.row.size, _PARTITION_BLOCK):  # (the outputs written in place, as `out`)
        block = slice(lo, lo + _PARTITION_BLOCK)
        if keep is None:
            node, rows, to = items.node[block], items.row[block], child[block]
        else:  # the block's items of split nodes
            sent = keep[block].nonzero()[0]
            part = slice(at, at + sent.size)
            at = part.stop
            node, to = items.node[block].take(sent, mode="clip"), child[part]
            rows = items.row[block].take(sent, out=row[part], mode="clip")
            if not one:
                items.wi[block].take(sent, out=wi[part], mode="clip")
        where = base.take(node, out=index[:node.size], mode="clip")
        where += rows
        high.take(node, out=to, mode="clip")
        to += dense.take(where, mode="clip")
        np.right_shift(to, 32, out=to)
    return Items(row, child, wi)


def _child_tables(data: TrainingData, splits: Splits,
                  left_child: NDArray[np.int64]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Per split node, ``feature * n`` (the item's index into ``data.dense`` less its row) and ``high =
    (left + 1) << 32`` less ``cut_rank + 1``.

    With ``r`` an item's dense rank, ``(r + high) >> 32`` is ``left + (r > cut_rank)``, its child: the low
    word holds ``r - cut_rank - 1``, which borrows one from the high word exactly when it is negative (ranks
    and children stay below ``2**31``).
    """
    high = np.left_shift(left_child + 1, 32)
    high -= splits.cut_rank + 1
    return splits.feature * data.rows, high


#: Items sent to their children at a time by :func:`_partition_blocks` (a few MB of temporaries)
_PARTITION_BLOCK = 1 << 16


def _collect(records: list[dict[str, NDArray]], trees: int) -> list[Tree]:
    """Reassemble the per-level records into one breadth-first node table per tree: every column ordered by
    tree and converted to its stored type once, each tree's arrays slices of it. One column at a time, each
    level's part released once gathered (a fit's largest trees are tens of megabytes of records)."""
    tree = np.concatenate([r.pop("tree") for r in records])
    order = None if trees == 1 else np.argsort(tree, kind="stable")  # (one tree: already in order)
    bounds = np.append(0, np.cumsum(np.bincount(tree, minlength=trees)))
    del tree
    column = {"impurity_decrease": "decrease"}
    stored = {}
    for name, dtype in NODE_STORAGE.items():
        values = np.concatenate([r.pop(column.get(name, name)) for r in records])
        stored[name] = (values if order is None else values[order]).astype(dtype, copy=False)
        del values
    return [Tree(**{name: values[lo:hi] for name, values in stored.items()}) for lo, hi in zip(bounds[:-1], bounds[1:])]
