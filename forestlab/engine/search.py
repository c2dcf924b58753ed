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

from .fast_search import record_cuts
from .categories import category_order, left_sets
from .presort import TrainingData
from .running import running_sums
from .splitter import CartSplitter
from .workspace import Workspace, scratch

__all__ = ["Items", "Splits", "best_splits", "checked_impurity"]

TIE_TOLERANCE = 1e-12


@dataclass
class Items:
    """The open (tree, row) pairs of one level; ``node`` indexes the level's open nodes, ``wi`` is
    ``slot * n + row``, the pair's column in the batch's weighted statistics (the same array as ``row`` in a
    batch of one tree)."""

    row: NDArray[np.int64]
    node: NDArray[np.int64]
    wi: NDArray[np.int64]

    def take(self, keep: NDArray[np.intp]) -> Items:
        row = np.take(self.row, keep, mode="clip")
        wi = row if self.wi is self.row else np.take(self.wi, keep, mode="clip")
        return Items(row, np.take(self.node, keep, mode="clip"), wi)


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
    imp = splitter.impurity(S)
    if not np.all(np.isfinite(imp)):
        raise FloatingPointError(f"{type(splitter).__name__}.impurity returned a non-finite value during growth")
    return imp


@dataclass
class _Segments:
    """The items of every (node, candidate feature) pair, sorted by that feature, concatenated.

    ``code`` is ``candidate << code_shift | v`` per element: ``v`` is the dense rank (int64 codes), the dense
    rank with the item below it (int64 codes when every candidate feature is tie-free), or ``feature * n +
    position`` (uint32 codes, from :func:`_position_segments`). ``no_cut[e]`` is True where
    element ``e`` and the next hold equal values of the same candidate (and at the last element): no cut lies
    after such an element; None when every candidate feature is tie-free (no neighbours hold equal values).
    Elements are known by their ``item`` (the generic search then fills ``x``,
    ``wi`` and ``row``, :meth:`materialise`) or, from :func:`_position_segments`, by ``row`` and ``wi``
    directly (``item`` None).
    """

    cand_node: NDArray[np.int64]   # (C,) node of each candidate
    cand_feat: NDArray[np.int64]   # (C,) feature of each candidate
    cand_tree: NDArray[np.int64]   # (C,) batch slot of each candidate
    start: NDArray[np.int64]       # (C,) first element of each candidate's segment
    size: NDArray[np.int64]        # (C,) elements of each candidate's segment
    node_first: NDArray[np.int64]  # first candidate of every node that has candidates
    item: NDArray[np.int64] | None  # (L,) the level's item of each element (None: ``row``, ``wi`` given)
    code: NDArray                  # (L,) candidate and value of each element
    no_cut: NDArray[np.bool_] | None  # (L,) equal value next (None: never)
    items: Items
    data: TrainingData
    code_shift: int                # bits below the candidate in ``code``
    x: NDArray[np.float64] | None = None   # (L,) feature value (category position for categorical), NaN last
    wi: NDArray[np.int64] | None = None    # (L,) index of each element's (tree, row) in the weighted statistics
    row: NDArray[np.int64] | None = None   # (L,) training row of each element
    _cand_of: NDArray[np.int64] | None = None

    @property
    def cand_of(self) -> NDArray[np.int64]:
        """(L,) candidate of each element (int64 codes: formed in place of ``code``)."""
        if self._cand_of is None:
            self._cand_of = np.right_shift(self.code, self.code_shift, out=self.code) \
                if self.code.dtype == np.int64 else np.right_shift(self.code, self.code_shift, dtype=np.int64)
        return self._cand_of

    def candidate(self, element: NDArray[np.intp]) -> NDArray[np.int64]:
        """Candidate of the given elements (segments are never empty)."""
        return np.searchsorted(self.start, element, side="right") - 1

    def rows_of(self, element: NDArray[np.intp]) -> NDArray[np.int64]:
        """Training rows of the given elements."""
        return self.items.row[self.item[element]] if self.row is None else self.row[element]

    def materialise(self) -> None:
        """Fill ``row``, ``wi`` and ``x`` (NaN for missing values) for the generic search."""
        self.row = self.items.row[self.item]
        self.wi = self.items.wi[self.item]
        self.x = self.data.X.ravel()[self.row * self.data.features + self.cand_feat[self.cand_of]]


def best_splits(data: TrainingData, splitter: CartSplitter, min_leaf: float, batch, items: Items, node_tree, mask,
                parent, means=None) -> Splits:
    """Exact best split of every node over its candidate features.

    Ties (scores within a relative 1e-12): lowest feature, then smallest threshold, then missing cases sent
    right. ``batch`` holds the batch's statistics: ``stats`` (channel-major weighted statistics, formed when
    first read), ``lightest`` (smallest positive case weight), ``fast`` (the statistics packed for one of
    :mod:`._fast_search`'s searches, or None) and ``work`` (scratch buffers reused from level to level;
    results never live in them). ``parent`` holds the nodes' ``W * i(t)``; ``means`` (fast searches) the
    nodes' first summed statistic over their weight.
    """
    out = Splits.none(mask.shape[0], data.category_words)
    cand = np.flatnonzero(mask)
    if cand.size == 0 or items.row.size == 0:
        return out
    seg = _sorted_segments(data, items, node_tree, mask, cand, batch.work, by_position=batch.fast is not None)
    if batch.fast is not None:
        return batch.fast.best_splits(seg, splitter, min_leaf, batch.lightest, items, parent, means, out,
                                      TIE_TOLERANCE, batch.work)
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


def _order_categories(data: TrainingData, seg: _Segments, weights) -> _CategoryOrder | None:
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
    perm = np.argsort(lc * (k + 1) + position.astype(np.int64), kind="stable")
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


def _sorted_segments(data: TrainingData, items: Items, node_tree, mask, cand, work: Workspace | None = None,
                     by_position: bool = False) -> _Segments:
    """Sort all (candidate, item) pairs of a level by candidate and value with one ``np.sort``.

    Each pair's key is ``code << item_bits | item`` with ``code = candidate << dense_bits | dense rank``:
    sorting the keys sorts every candidate's items by value, ties in item order, and the item comes back
    in the low bits; neighbours with equal codes hold equal values. Should the key need more than 63 bits,
    a stable argsort of the codes does the same. With ``by_position`` (the fast searches, which need each
    element's row and statistics index, not its item), :func:`_position_segments` sorts 32-bit codes
    instead where it applies; the elements come out in the same order.
    """
    p = data.features
    K = mask.shape[0]
    cand_node, cand_feat = np.divmod(cand, p)
    ncand = np.bincount(cand_node, minlength=K)
    first = np.cumsum(ncand) - ncand
    size = np.bincount(items.node, minlength=K)[cand_node]
    start = np.cumsum(size) - size
    parts = (cand_node, cand_feat, node_tree[cand_node], start, size, first[ncand > 0])
    tie_free = data.tie_free is not None and bool(data.tie_free[cand_feat].all())
    if by_position and tie_free and _positions_fit(data, cand_feat, ncand):
        return _position_segments(data, items, parts, ncand, work)
    N = items.row.size
    item_bits = max(1, (N - 1).bit_length())
    shift = data.dense_bits
    if (cand.size - 1).bit_length() + data.dense_bits + item_bits <= 63:
        key, _ = _pair_keys(data, items, cand_feat, ncand, first, item_bits, work)
        key.sort()
        item = np.bitwise_and(key, (1 << item_bits) - 1, out=scratch(work, "item", key.size, np.int64))
        if tie_free:  # the key serves as code (shifted only if the candidates are asked for)
            code, shift = key, shift + item_bits
        else:
            code = np.right_shift(key, item_bits, out=key)
    else:
        code, pair_item = _pair_keys(data, items, cand_feat, ncand, first, 0, work)
        perm = np.argsort(code, kind="stable")
        item = perm % N if pair_item is None else pair_item[perm]
        code = code[perm]
    return _Segments(*parts, item, code, None if tie_free else _equal_next(code, work), items, data, shift)


def _equal_next(code: NDArray[np.int64], work: Workspace | None) -> NDArray[np.bool_]:
    """Where an element's code equals the next one's (True at the last element)."""
    no_cut = scratch(work, "no_cut", code.size, np.bool_)
    np.equal(code[1:], code[:-1], out=no_cut[:-1])
    no_cut[-1] = True
    return no_cut


def _position_bits(data: TrainingData) -> int:
    """Bits of ``feature * n + position`` (an index into ``data.order``)."""
    return max(1, (data.features * data.rows - 1).bit_length())


def _positions_fit(data: TrainingData, cand_feat, ncand) -> bool:
    """Whether :func:`_position_segments` applies to tie-free candidates: ``data.order`` exists, every node
    has the same number of candidates, and ``candidate << bits | feature * n + position`` fits 32 bits."""
    if data.order is None or cand_feat.size == 0:
        return False
    m = int(ncand[0])
    return m > 0 and (cand_feat.size - 1).bit_length() + _position_bits(data) <= 32 and bool(np.all(ncand == m))


def _position_segments(data: TrainingData, items: Items, parts, ncand, work: Workspace | None) -> _Segments:
    """The sorted segments from one sort of 32-bit codes ``candidate << bits | feature * n + rank``.

    For a tie-free feature the dense rank is the row's position in ``data.order``, so the low bits of a
    sorted code index ``data.order`` and give the element's row: no item need travel in the key, and the
    sort takes about half the time of a 64-bit one (4 against 8.6 ns an element on the Intel test machine).
    A node's items are distinct (tree, row) pairs, so no two codes of a segment are equal, no neighbours hold
    equal values, and the order is that of the 64-bit keys.
    """
    cand_node, cand_feat, cand_tree, start, size, _ = parts
    n, bits = data.rows, _position_bits(data)
    N, m = items.row.size, int(ncand[0])
    L = m * N
    index, ranks = _slot_ranks(data, items, cand_feat, m, work)
    index, code = index.ravel(), ranks.ravel().view(np.uint32)
    high = ((np.arange(cand_feat.size, dtype=np.uint32) << bits) + (cand_feat * n).astype(np.uint32))
    code.reshape(m, N)[:] += np.take(high.reshape(-1, m).T, items.node, axis=1,
                                     out=scratch(work, "high32", L, np.uint32).reshape(m, N), mode="clip")
    code.sort()
    at = np.bitwise_and(code, (1 << bits) - 1, out=index, dtype=np.int64)
    row32 = np.take(data.order.ravel(), at, out=scratch(work, "row32", L, np.int32), mode="clip")
    row = index  # the positions are spent
    np.copyto(row, row32)
    if items.wi is items.row:  # one tree: a row is its own statistics index
        wi = row
    else:  # slot * n + row: the elements of a tree are contiguous, the trees in slot order
        tree_start = _run_starts(cand_tree)
        wi = np.repeat(cand_tree[tree_start] * n, np.add.reduceat(size, tree_start))
        wi += row
    return _Segments(*parts, None, code, None, items, data, bits, wi=wi, row=row)


def _pair_keys(data: TrainingData, items: Items, cand_feat, ncand, first, item_bits: int,
               work: Workspace | None = None) -> tuple[NDArray[np.int64], NDArray[np.int64] | None]:
    """The key ``(candidate << dense_bits | dense[feature, row]) << item_bits | item`` of every (item,
    candidate of its node) pair (``item_bits = 0``: no item), and the item of every pair (None when the
    pairs are slot-major: pair ``j * N + i`` is item ``i``)."""
    n, db = data.rows, data.dense_bits
    dense = data.dense.ravel()
    N = items.row.size
    m = int(ncand[0])
    if m and np.all(ncand == m):
        # slot-major (m, N): a handful of whole-array calls for all slots
        key, ranks = _slot_ranks(data, items, cand_feat, m, work)
        np.left_shift(ranks, item_bits, out=key, dtype=np.int64)
        base = np.take((first << db) << item_bits, items.node, out=scratch(work, "node_base", N, np.int64),
                       mode="clip")
        if item_bits:
            base |= np.arange(N)
        key += base
        key += (np.arange(m)[:, None] << db) << item_bits
        return key.ravel(), None
    reps = ncand[items.node]
    pair_item = np.repeat(np.arange(N), reps)
    offsets = np.arange(pair_item.size) - np.repeat(np.cumsum(reps) - reps, reps)
    pair_cand = first[items.node][pair_item] + offsets
    code = (pair_cand << db) | dense[cand_feat[pair_cand] * n + items.row[pair_item]]
    return (code << item_bits) | pair_item if item_bits else code, pair_item


def _slot_ranks(data: TrainingData, items: Items, cand_feat, m: int, work: Workspace | None):
    """Slot-major (m, N) dense ranks of every (item, candidate of its node) pair, every node having ``m``
    candidates, and the (m, N) int64 buffer of their indices into ``data.dense`` (``feature * n + row``; the
    caller may reuse it). Both are views of scratch buffers (``key`` and ``rank``)."""
    N = items.row.size
    index = scratch(work, "key", m * N, np.int64).reshape(m, N)
    np.take(cand_feat.reshape(-1, m).T * data.rows, items.node, axis=1, out=index, mode="clip")
    index += items.row
    ranks = np.take(data.dense.ravel(), index, out=scratch(work, "rank", m * N, data.dense.dtype).reshape(m, N),
                    mode="clip")
    return index, ranks


def _missing_totals(seg: _Segments, elem: NDArray[np.float64]) -> NDArray[np.float64] | None:
    """Summed statistics of each segment's missing cases, shape (1+s, C); None if there are none."""
    missing = np.flatnonzero(np.isnan(seg.x))
    if missing.size == 0:
        return None
    C = seg.start.size
    return np.stack([np.bincount(seg.cand_of[missing], weights=channel[missing], minlength=C)
                     for channel in elem])


def _distinct_cuts(seg: _Segments) -> NDArray[np.intp]:
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


def _run_starts(values: NDArray) -> NDArray[np.intp]:
    """Where each run of equal neighbours of a non-empty array starts."""
    change = np.empty(values.size, dtype=bool)
    change[0] = True
    np.not_equal(values[1:], values[:-1], out=change[1:])
    return np.flatnonzero(change)


def _argmax_per_node(node, score, parent):
    """First cut per node whose score is within the tie tolerance of the node's best."""
    starts = _run_starts(node)
    nodes = node[starts]
    best = np.maximum.reduceat(score, starts)
    scale = np.maximum(np.abs(best), np.abs(parent[nodes]))
    group = np.repeat(np.arange(starts.size), np.diff(np.append(starts, score.size)))
    tied = score >= (best - TIE_TOLERANCE * scale)[group]
    pick = np.minimum.reduceat(np.where(tied, np.arange(score.size), score.size), starts)
    return nodes, pick
