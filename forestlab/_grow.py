"""Level-synchronous growth of exact CART trees, a batch of trees at a time.

See ``forestlab/ENGINE.md`` for the array shapes and invariants. In short: an *item* is one in-bag
(tree, row) pair; at every level all open nodes of all trees in the batch are searched together by sorting
packed integer keys ``candidate * n + rank``, so the only Python loops are over levels and (for the random
draws and the running sums) over the trees of the batch.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ._bootstrap import draw_counts
from ._presort import TrainingData
from ._sampler import CandidateSampler
from ._splitter import CartSplitter
from ._tree import TreeArrays

__all__ = ["GrowthRules", "grow_batch"]

TIE_TOLERANCE = 1e-12


@dataclass(frozen=True)
class GrowthRules:
    """The settings every tree of a forest is grown with (all validated and resolved)."""

    sampler: CandidateSampler
    splitter: CartSplitter
    min_leaf: float
    depth_limit: int | None
    sample_size: int
    replace: bool


@dataclass(frozen=True)
class _Batch:
    """Weighted statistics of a batch of trees, channel-major: ``stats[c, slot * n + row]``."""

    stats: NDArray[np.float64]
    lightest: float  # smallest positive case weight; a min_leaf at most this needs no weight checks

    @classmethod
    def weighted(cls, data: TrainingData, counts: NDArray[np.uint8]) -> _Batch:
        stats = (data.stats.T[:, None, :] * counts[None, :, :]).reshape(data.stats.shape[1], -1)
        positive = stats[0][stats[0] > 0]
        return cls(stats, float(positive.min()) if positive.size else 1.0)


@dataclass
class _Items:
    """The open (tree, row) pairs of one level; ``node`` indexes the level's open nodes."""

    row: NDArray[np.int64]
    node: NDArray[np.int64]

    def take(self, keep: NDArray[np.intp]) -> _Items:
        return _Items(self.row[keep], self.node[keep])


@dataclass
class _Splits:
    """Best split per node of a level (entries of nodes without a valid split are unused)."""

    found: NDArray[np.bool_]
    feature: NDArray[np.int64]
    threshold: NDArray[np.float64]
    decrease: NDArray[np.float64]


def grow_batch(data: TrainingData, rules: GrowthRules,
               seeds: list[np.random.SeedSequence]) -> tuple[list[TreeArrays], NDArray[np.uint8]]:
    """Grow one tree per seed; returns the trees and their in-bag counts, shape ``(len(seeds), n)``.

    Each tree draws its bootstrap sample first and then, level by level, its candidate features, only from
    its own generator; every sum is taken within one tree, so a tree does not depend on its batch.
    """
    gens = [np.random.default_rng(s) for s in seeds]
    n = data.rows
    counts = np.stack([draw_counts(g, n, rules.sample_size, rules.replace) for g in gens])
    subspace = _tree_masks(rules.sampler, gens, data.features)
    batch = _Batch.weighted(data, counts)
    rows = [np.flatnonzero(c) for c in counts]
    items = _Items(np.concatenate(rows), np.repeat(np.arange(len(gens)), [r.size for r in rows]))
    node_tree = np.arange(len(gens))
    base = np.zeros(len(gens), dtype=np.int64)
    records: list[dict[str, NDArray]] = []
    depth = 0
    while node_tree.size:
        level, items, node_tree, base = _grow_level(data, rules, gens, subspace, batch, items, node_tree,
                                                    base, depth)
        records.append(level)
        depth += 1
    return _collect(records, len(gens)), counts


def _tree_masks(sampler: CandidateSampler, gens: list[np.random.Generator],
                features: int) -> NDArray[np.bool_] | None:
    """One candidate mask per tree for a per-tree sampler, drawn before any level."""
    if not sampler.per_tree:
        return None
    return np.concatenate([checked_mask(sampler, g, 1, features) for g in gens])


def checked_mask(sampler: CandidateSampler, rng: np.random.Generator, nodes: int,
                 features: int) -> NDArray[np.bool_]:
    """``sampler.draw`` with its output checked, naming the sampler class if it is wrong."""
    mask = sampler.draw(rng, nodes, features)
    if not isinstance(mask, np.ndarray) or mask.dtype != np.bool_ or mask.shape != (nodes, features):
        got = f"{mask.dtype} array of shape {mask.shape}" if isinstance(mask, np.ndarray) else type(mask).__name__
        raise ValueError(
            f"{type(sampler).__name__}.draw(rng, {nodes}, {features}) must return a bool array of shape "
            f"({nodes}, {features}); got {got}"
        )
    return mask


def _grow_level(data, rules, gens, subspace, batch, items, node_tree, base, depth):
    """Summarise, search and partition every open node of one level."""
    n, K = data.rows, node_tree.size
    wi = node_tree[items.node] * n + items.row
    weight, totals, value, pure = _node_summaries(data, batch, items, wi, K)
    closed = pure | (weight < 2 * rules.min_leaf)
    if rules.depth_limit is not None and depth >= rules.depth_limit:
        closed[:] = True
    open_nodes = np.flatnonzero(~closed)
    splits = _Splits(np.zeros(K, bool), np.full(K, -1), np.full(K, np.nan), np.zeros(K))
    if open_nodes.size:
        sub = _search_open(data, rules, gens, subspace, batch, items, node_tree, totals, weight, closed,
                           open_nodes)
        for name in ("found", "feature", "threshold", "decrease"):
            getattr(splits, name)[open_nodes] = getattr(sub, name)
    local = _local_ids(node_tree, base)
    level_size = np.bincount(node_tree, minlength=base.size)
    split_nodes = np.flatnonzero(splits.found)
    left = np.full(K, -1, dtype=np.int64)
    left[split_nodes] = _child_ids(node_tree[split_nodes], base + level_size)
    record = {
        "tree": node_tree, "local": local, "feature": np.where(splits.found, splits.feature, -1),
        "threshold": np.where(splits.found, splits.threshold, np.nan), "left": left, "value": value,
        "cases": weight, "decrease": np.where(splits.found, splits.decrease, 0.0),
        "depth": np.full(K, depth, dtype=np.int64),
    }
    next_items = _partition(data, items, splits)
    return record, next_items, np.repeat(node_tree[split_nodes], 2), base + level_size


def _node_summaries(data: TrainingData, batch, items: _Items, wi, K: int):
    """Per node: case weight, summed statistics, leaf value and whether all targets are equal."""
    item_stats = np.take(batch.stats, wi, axis=1)
    totals = np.stack([np.bincount(items.node, weights=channel, minlength=K) for channel in item_stats], axis=1)
    weight = totals[:, 0]
    y = data.target[items.row]
    if data.classes:
        by_class = np.bincount(items.node * data.classes + y, weights=item_stats[0],
                               minlength=K * data.classes).reshape(K, data.classes)
        value = np.argmax(by_class, axis=1).astype(np.float64)
    else:
        value = np.bincount(items.node, weights=item_stats[0] * y, minlength=K) / weight
    reference = np.empty(K, dtype=y.dtype)
    reference[items.node] = y
    pure = np.bincount(items.node, weights=(y != reference[items.node]), minlength=K) == 0
    return weight, totals, value, pure


def _search_open(data, rules, gens, subspace, batch, items, node_tree, totals, weight, closed, open_nodes):
    """Best split of every open node; per-node samplers fall back to the other features if none splits."""
    keep = np.flatnonzero(~closed[items.node])
    relabel = np.cumsum(~closed) - 1
    sub_items = _Items(items.row[keep], relabel[items.node[keep]])
    sub_tree = node_tree[open_nodes]
    mask = _level_mask(rules.sampler, gens, subspace, sub_tree, data.features)
    parent = weight[open_nodes] * _impurity(rules.splitter, totals[open_nodes])
    splits = _best_splits(data, rules, batch, sub_items, sub_tree, mask, parent)
    if rules.sampler.per_tree or splits.found.all():
        return splits
    retry = ~mask & ~splits.found[:, None]
    again = _best_splits(data, rules, batch, sub_items.take(np.flatnonzero(~splits.found[sub_items.node])),
                         sub_tree, retry, parent)
    for name in ("found", "feature", "threshold", "decrease"):
        getattr(splits, name)[again.found] = getattr(again, name)[again.found]
    return splits


def _level_mask(sampler, gens, subspace, sub_tree, features: int) -> NDArray[np.bool_]:
    """Candidate masks of the open nodes, each tree drawing from its own generator."""
    if subspace is not None:
        return subspace[sub_tree]
    per_tree = np.bincount(sub_tree, minlength=len(gens))
    parts = [checked_mask(sampler, gens[t], int(k), features) for t, k in enumerate(per_tree) if k]
    return np.concatenate(parts)


def _impurity(splitter: CartSplitter, S: NDArray[np.float64]) -> NDArray[np.float64]:
    """``splitter.impurity`` with a check that it stayed finite during growth."""
    imp = splitter.impurity(S)
    if not np.all(np.isfinite(imp)):
        raise FloatingPointError(f"{type(splitter).__name__}.impurity returned a non-finite value during growth")
    return imp


def _best_splits(data, rules, batch, items: _Items, node_tree, mask, parent) -> _Splits:
    """Exact best split of every node over its candidate features (ties: lowest feature, smallest threshold)."""
    K = mask.shape[0]
    out = _Splits(np.zeros(K, bool), np.full(K, -1), np.full(K, np.nan), np.zeros(K))
    cand = np.flatnonzero(mask)
    if cand.size == 0 or items.row.size == 0:
        return out
    seg = _sorted_segments(data, items, node_tree, mask, cand, batch.lightest)
    cs, seg_total = _running_sums(np.take(batch.stats, seg.wi, axis=1), seg)
    boundary, left, right = _valid_boundaries(seg, cs, seg_total, rules.min_leaf)
    if boundary.size == 0:
        return out
    node = seg.cand_node[seg.cand_of[boundary]]
    score = parent[node] - left[0] * _impurity(rules.splitter, left.T) \
        - right[0] * _impurity(rules.splitter, right.T)
    nodes, pick = _argmax_per_node(node, score, parent)
    e = boundary[pick]
    lo, hi = seg.x[e], seg.x[e + 1]
    threshold = 0.5 * lo + 0.5 * hi
    out.found[nodes] = True
    out.feature[nodes] = seg.cand_feat[seg.cand_of[e]]
    out.threshold[nodes] = np.where((threshold < hi) & (threshold >= lo), threshold, lo)
    out.decrease[nodes] = score[pick]
    return out


@dataclass
class _Segments:
    """The rows of every (node, candidate feature) pair, sorted by that feature, concatenated."""

    cand_node: NDArray[np.int64]   # (C,) node of each candidate
    cand_feat: NDArray[np.int64]   # (C,) feature of each candidate
    cand_tree: NDArray[np.int64]   # (C,) batch slot of each candidate
    start: NDArray[np.int64]       # (C,) first element of each candidate's segment
    cand_of: NDArray[np.int64]     # (L,) candidate of each element
    x: NDArray[np.float64]         # (L,) feature value of each element (non-decreasing per segment)
    wi: NDArray[np.int64]          # (L,) index of each element's (tree, row) in the weighted statistics
    lightest: float                # smallest weight of any element: min_leaf at most this needs no check


def _sorted_segments(data: TrainingData, items: _Items, node_tree, mask, cand, lightest) -> _Segments:
    """Sort all (candidate, row) pairs of a level with one ``np.sort`` of packed keys."""
    n, p = data.rows, data.features
    K = mask.shape[0]
    cand_node, cand_feat = np.divmod(cand, p)
    ncand = np.bincount(cand_node, minlength=K)
    first = np.cumsum(ncand) - ncand
    key = _packed_keys(data, items, cand_feat, ncand, first)
    key.sort()
    size = np.bincount(items.node, minlength=K)[cand_node]
    cand_of = np.repeat(np.arange(cand.size), size)
    flat = key + np.repeat((cand_feat - np.arange(cand.size)) * n, size)
    cand_tree = node_tree[cand_node]
    wi = data.order.ravel()[flat]
    if cand_tree[-1] > 0:
        wi += np.repeat(cand_tree * n, size)
    return _Segments(cand_node, cand_feat, cand_tree, np.cumsum(size) - size, cand_of,
                     data.sorted_x.ravel()[flat], wi, lightest)


def _packed_keys(data: TrainingData, items: _Items, cand_feat, ncand, first) -> NDArray[np.int64]:
    """``candidate * n + rank[row, feature]`` for every (item, candidate of its node) pair."""
    n, p = data.rows, data.features
    rank = data.rank.ravel()
    m = int(ncand[0])
    if m and np.all(ncand == m):
        feat = cand_feat.reshape(-1, m)[items.node]
        feat += (items.row * p)[:, None]
        key = (first[items.node] * n)[:, None] + np.arange(0, m * n, n)
        key += rank[feat]
        return key.ravel()
    reps = ncand[items.node]
    pair_item = np.repeat(np.arange(items.row.size), reps)
    offsets = np.arange(pair_item.size) - np.repeat(np.cumsum(reps) - reps, reps)
    pair_cand = first[items.node][pair_item] + offsets
    return pair_cand * n + rank[items.row[pair_item] * p + cand_feat[pair_cand]]


def _running_sums(stats: NDArray[np.float64], seg: _Segments):
    """Running sums of the statistics restarted at every segment, and each segment's total.

    Each segment start gets the previous segment's total subtracted so one ``cumsum`` per tree restarts near
    zero (rounding stays at the scale of one segment); sums never cross trees, so a tree's arithmetic does
    not depend on its batch.
    """
    totals = np.add.reduceat(stats, seg.start, axis=1)
    tree_first = np.ones(seg.start.size, dtype=bool)
    tree_first[1:] = seg.cand_tree[1:] != seg.cand_tree[:-1]
    restart = np.flatnonzero(~tree_first)
    stats[:, seg.start[restart]] -= totals[:, restart - 1]
    cs = np.empty_like(stats)
    bounds = np.append(seg.start[tree_first], stats.shape[1])
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        np.cumsum(stats[:, lo:hi], axis=1, out=cs[:, lo:hi])
    return cs, totals


def _valid_boundaries(seg: _Segments, cs, totals, min_leaf: float):
    """Elements after which a split is allowed: between distinct values, ``min_leaf`` on both sides."""
    L = seg.x.size
    valid = np.zeros(L, dtype=bool)
    np.greater(seg.x[1:], seg.x[:-1], out=valid[:-1])
    valid[seg.start[1:] - 1] = False
    if min_leaf > seg.lightest:
        valid &= cs[0] >= min_leaf
        valid &= totals[0, seg.cand_of] - cs[0] >= min_leaf
    boundary = np.flatnonzero(valid)
    left = np.take(cs, boundary, axis=1)
    right = np.take(totals, seg.cand_of[boundary], axis=1) - left
    return boundary, left, right


def _argmax_per_node(node, score, parent):
    """First boundary per node whose score is within the tie tolerance of the node's best."""
    starts = np.flatnonzero(np.r_[True, node[1:] != node[:-1]])
    nodes = node[starts]
    best = np.maximum.reduceat(score, starts)
    scale = np.maximum(np.abs(best), np.abs(parent[nodes]))
    group = np.repeat(np.arange(starts.size), np.diff(np.append(starts, score.size)))
    tied = score >= (best - TIE_TOLERANCE * scale)[group]
    pick = np.minimum.reduceat(np.where(tied, np.arange(score.size), score.size), starts)
    return nodes, pick


def _local_ids(node_tree, base):
    """Index of each node of the level within its own tree (breadth-first numbering)."""
    first = np.searchsorted(node_tree, node_tree, side="left")
    return base[node_tree] + np.arange(node_tree.size) - first


def _child_ids(split_tree, next_base):
    """Left-child index within its tree of each splitting node (the right child follows it)."""
    first = np.searchsorted(split_tree, split_tree, side="left")
    return next_base[split_tree] + 2 * (np.arange(split_tree.size) - first)


def _partition(data: TrainingData, items: _Items, splits: _Splits) -> _Items:
    """Send the items of split nodes to their children (order within each tree kept)."""
    keep = np.flatnonzero(splits.found[items.node])
    row, node = items.row[keep], items.node[keep]
    feature = splits.feature[node]
    go_right = data.X.ravel()[row * data.features + feature] > splits.threshold[node]
    child_rank = np.cumsum(splits.found) - 1
    return _Items(row, 2 * child_rank[node] + go_right)


def _collect(records: list[dict[str, NDArray]], trees: int) -> list[TreeArrays]:
    """Reassemble the per-level records into one breadth-first node table per tree."""
    allrec = {k: np.concatenate([r[k] for r in records]) for k in records[0]}
    order = np.argsort(allrec["tree"], kind="stable")
    sizes = np.bincount(allrec["tree"], minlength=trees)
    cuts = np.cumsum(sizes)[:-1]
    parts = {k: np.split(v[order], cuts) for k, v in allrec.items()}
    return [TreeArrays.from_columns(parts, b) for b in range(trees)]
