"""Exact best-split search for every open node of a level at once.

All (node, candidate feature) pairs are sorted with one ``np.sort`` of packed (candidate, dense rank, item) keys;
running sums of the weighted statistics, restarted per segment, give the left-child statistics at every
boundary between distinct values, and the splitter scores all of them in one call. Missing values (NaN)
sort last within each segment; every boundary is scored twice when the segment holds missing cases (missing
sent right, then left) and the better option is kept. See ``ENGINE.md`` for the shapes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .categories import category_order, left_sets
from .category_runs import CategoryRunsPath
from .category_tables import unsorted_gini_splits
from .cuts import record_cuts
from .key_sort import stable_order
from .presort import TrainingData
from .running import running_sums
from .elements import Items, Segments
from .segments import run_starts, sorted_segments
from .splitter import CartSplitter, call_splitter

__all__ = ["Items", "Splits", "best_splits", "checked_impurity"]


TIE_TOLERANCE = 1e-12


@dataclass
class Splits:
    """Best split per node of a level (entries of nodes without a valid split are unused)."""

    found: NDArray[np.bool_]
    feature: NDArray[np.int64]
    threshold: NDArray[np.float64]
    decrease: NDArray[np.float64]
    missing_left: NDArray[np.bool_]
    category_left: NDArray[np.uint64]  # (nodes, words) left-category bit sets of categorical splits
    cut_rank: NDArray[np.int64]  # dense rank of the largest value sent left (numeric splits)
    sides: NDArray[np.float64]  # (nodes, 2, 3) the fast searches' children: [left, right] x [W, c1, items]

    @classmethod
    def none(cls, nodes: int, words: int) -> Splits:
        return cls(np.zeros(nodes, bool), np.full(nodes, -1), np.full(nodes, np.nan), np.zeros(nodes),
                   np.zeros(nodes, bool), np.zeros((nodes, words), dtype=np.uint64), np.full(nodes, -1),
                   np.zeros((nodes, 2, 3)))

    def update(self, where: NDArray, other: Splits, other_where: NDArray | slice = slice(None)) -> None:
        """Copy ``other``'s entries at ``other_where`` into this one's at ``where``."""
        for name in ("found", "feature", "threshold", "decrease", "missing_left", "category_left", "cut_rank",
                     "sides"):
            getattr(self, name)[where] = getattr(other, name)[other_where]


def checked_impurity(splitter: CartSplitter, S: NDArray[np.float64]) -> NDArray[np.float64]:
    """``splitter.impurity`` with a check that it stayed finite during growth."""
    imp = call_splitter(splitter, "impurity", S)
    if not np.all(np.isfinite(imp)):
        raise FloatingPointError(f"{type(splitter).__name__}.impurity returned a non-finite value during growth")
    return imp


def best_splits(data: TrainingData, splitter: CartSplitter, min_leaf: float, batch, items: Items, node_tree, mask,
                parent, means=None, carry=None) -> Splits:
    """Exact best split of every node over its candidate features.

    Ties (scores within a relative 1e-12): lowest feature, then smallest threshold, then missing cases sent
    right. ``batch`` holds the batch's statistics: ``stats`` (channel-major weighted statistics, formed when
    first read), ``lightest`` (smallest positive case weight), ``fast`` (the statistics packed for one of
    :mod:`._fast_search`'s searches, or None) and ``work`` (scratch buffers reused from level to level;
    results never live in them). ``parent`` holds the nodes' ``W * i(t)``; ``means`` (fast searches) the
    nodes' first summed statistic over their weight (squared error) or their class weights (many classes);
    ``carry`` (the fast searches of a level searched in blocks, :mod:`.level_blocks`) the floating-point
    running sums of the blocks before this one.
    """
    out = Splits.none(mask.shape[0], data.category_words)
    cand = np.flatnonzero(mask)
    if cand.size == 0 or items.row.size == 0:
        return out
    if isinstance(batch.fast, CategoryRunsPath) and batch.fast.sorts_nothing(cand):  # (all categorical, Gini)
        return unsorted_gini_splits(batch.fast, splitter, min_leaf, batch.lightest, items, node_tree, mask, cand,
                                    parent, out, TIE_TOLERANCE, batch.work)
    seg = sorted_segments(data, items, node_tree, mask, cand, batch.work, by_position=batch.fast is not None)
    if batch.fast is not None:
        more = {} if carry is None else {"carry": carry}  # (blocks: the two-class and squared-error paths)
        return batch.fast.best_splits(seg, splitter, min_leaf, batch.lightest, items, parent, means, out,
                                      TIE_TOLERANCE, batch.work, **more)
    stats, lightest = batch.stats, batch.lightest
    seg.materialise()
    order = _order_categories(data, seg, stats[0]) if data.category_words else None
    elem = np.take(stats, seg.wi, axis=1, mode="clip")
    missing = _missing_totals(seg, elem) if data.missing else None
    cs, totals = running_sums(elem, seg.start, seg.cand_tree)
    cut = _distinct_cuts(seg)
    if cut.size == 0:
        return out
    left = np.take(cs, cut, axis=1, mode="clip")
    right = np.take(totals, seg.cand_of[cut], axis=1, mode="clip") - left
    node = seg.cand_node[seg.cand_of[cut]]
    score, missing_side = _scores(splitter, min_leaf, lightest, left, right, parent[node],
                                  None if missing is None else np.take(missing, seg.cand_of[cut], axis=1, mode="clip"))
    if min_leaf > lightest:
        ok = np.flatnonzero(score > -np.inf)
        if ok.size == 0:
            return out
        nodes, pick = _argmax_per_node(node[ok], score[ok], parent)
        pick = ok[pick]
    else:
        nodes, pick = _argmax_per_node(node, score, parent)
    e = cut[pick]
    record_cuts(seg, out, nodes, e, score[pick], left[0, pick] >= right[0, pick])
    if missing_side is not None:
        seen, to_left = missing_side
        out.missing_left[nodes] = np.where(seen[pick], to_left[pick], out.missing_left[nodes])
    if order is not None:
        _record_category_sets(out, order, nodes, seg.cand_of[e], seg.x[e], data.category_words)
    return out


@dataclass
class _CategoryOrder:
    """Per categorical candidate: its index among them, category positions and weights."""

    local: NDArray[np.int64]      # (C,) index among categorical candidates, -1 for numeric ones
    pos: NDArray[np.int64]        # (Cc, k) position of each category in the candidate's order
    weight: NDArray[np.float64]   # (Cc, k) case weight of each category in the node


def _order_categories(data: TrainingData, seg: Segments, weights) -> _CategoryOrder | None:
    """Order each categorical candidate's categories and re-sort its elements by that order (in place)."""
    is_cat = data.categories[seg.cand_feat] > 0
    if not is_cat.any():
        return None
    k = int(data.categories.max())
    local = np.full(is_cat.size, -1, dtype=np.int64)
    local[is_cat] = np.arange(np.count_nonzero(is_cat))
    el = np.flatnonzero(is_cat[seg.cand_of])
    code, w, lc = seg.x[el], weights[seg.wi[el]], local[seg.cand_of[el]]
    seen = ~np.isnan(code)
    slot = lc[seen] * k + code[seen].astype(np.int64)
    cells = int(lc[-1] + 1) * k
    weight = np.bincount(slot, weights=w[seen], minlength=cells).reshape(-1, k)
    y = data.target[seg.row[el][seen]]
    by_class, response = None, None
    if data.classes > 2:
        by_class = np.bincount(slot * data.classes + y, weights=w[seen],
                               minlength=cells * data.classes).reshape(-1, k, data.classes)
    else:
        response = np.bincount(slot, weights=w[seen] * y, minlength=cells).reshape(-1, k)
    pos = category_order(weight, response, by_class)
    position = np.full(el.size, float(k))
    position[seen] = pos.ravel()[slot]
    key = lc * (k + 1) + position.astype(np.int64)
    perm = stable_order(key, int(key.max()).bit_length() if key.size else 1)
    position[~seen] = np.nan
    seg.x[el] = position[perm]
    seg.wi[el] = seg.wi[el][perm]
    seg.row[el] = seg.row[el][perm]
    return _CategoryOrder(local, pos, weight)


def _record_category_sets(out: Splits, order: _CategoryOrder, nodes, cand, cut_position, words: int) -> None:
    """Left-category bit sets of the nodes whose chosen split is categorical; their threshold becomes NaN."""
    lc = order.local[cand]
    is_cat = lc >= 0
    if not is_cat.any():
        return
    chosen = nodes[is_cat]
    out.category_left[chosen] = left_sets(order.pos[lc[is_cat]], order.weight[lc[is_cat]],
                                          cut_position[is_cat], out.missing_left[chosen], words)
    out.threshold[chosen] = np.nan


def _missing_totals(seg: Segments, elem: NDArray[np.float64]) -> NDArray[np.float64] | None:
    """Summed statistics of each segment's missing cases, shape (1+s, C); None if there are none."""
    missing = np.flatnonzero(np.isnan(seg.x))
    if missing.size == 0:
        return None
    C = seg.start.size
    return np.stack([np.bincount(seg.cand_of[missing], weights=channel[missing], minlength=C)
                     for channel in elem])


def _distinct_cuts(seg: Segments) -> NDArray[np.intp]:
    """Elements followed, in the same segment, by a strictly larger (non-missing) value."""
    valid = np.zeros(seg.x.size, dtype=bool)
    np.greater(seg.x[1:], seg.x[:-1], out=valid[:-1])
    valid[seg.start[1:] - 1] = False
    return np.flatnonzero(valid)


def _scores(splitter, min_leaf, lightest, left, right, parent, missing):
    """Impurity decrease of every cut (-inf where no option is allowed), and the missing-value side.

    Option A sends the segment's missing cases right (they sort last, so ``right`` already holds them);
    option B sends them left. B is taken only where it beats A by more than the tie tolerance. Returns None
    for the side when no segment has missing cases, else (cuts whose segment saw missing, B taken).
    """
    score = _decrease(splitter, left, right, parent)
    if min_leaf > lightest:
        score[(left[0] < min_leaf) | (right[0] < min_leaf)] = -np.inf
    if missing is None:
        return score, None
    has = np.flatnonzero(missing[0] > 0)
    left_b = left[:, has] + missing[:, has]
    right_b = right[:, has] - missing[:, has]
    score_b = _decrease(splitter, left_b, right_b, parent[has])
    if min_leaf > lightest:
        score_b[(left_b[0] < min_leaf) | (right_b[0] < min_leaf)] = -np.inf
    better = score_b > score[has] + TIE_TOLERANCE * np.abs(parent[has])
    score[has[better]] = score_b[better]
    seen = np.zeros(score.size, dtype=bool)
    seen[has] = True
    to_left = np.zeros(score.size, dtype=bool)
    to_left[has[better]] = True
    return score, (seen, to_left)


def _decrease(splitter, left, right, parent):
    """``W_t i(t) - W_l i(l) - W_r i(r)`` for channel-major left and right statistics."""
    return parent - left[0] * checked_impurity(splitter, left.T) - right[0] * checked_impurity(splitter, right.T)


def _argmax_per_node(node, score, parent):
    """First cut per node whose score is within the tie tolerance of the node's best."""
    starts = run_starts(node)
    nodes = node[starts]
    best = np.maximum.reduceat(score, starts)
    scale = np.maximum(np.abs(best), np.abs(parent[nodes]))
    group = np.repeat(np.arange(starts.size), np.diff(np.append(starts, score.size)))
    tied = score >= (best - TIE_TOLERANCE * scale)[group]
    pick = np.minimum.reduceat(np.where(tied, np.arange(score.size), score.size), starts)
    return nodes, pick
