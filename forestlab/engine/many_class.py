"""The many-class (K > 2) Gini and entropy search: O(1) work an element whatever the number of classes.

Without case weights every summed statistic is an integer count. A cut's Gini needs only the side weights
``W`` and the sums of squared class weights ``Q = sum_k c_k**2``; moving element ``e`` (class ``k``, weight
``w``) to the left of a cut raises the left ``Q`` by ``w (2 b + w)`` and lowers the right one by ``w (2 a +
w)``, where ``b`` and ``a`` are the class-``k`` weights before and after it in its segment
(:func:`.class_ranks.class_ranks`). So three integer running sums (``W``, and those two increments) give
every cut exactly: ``Q_l`` is the running sum of the first, ``Q_r`` the segment's total of the second less
its running sum. With ``W i = W - Q / W``, a cut scores ``Q_l / W_l + Q_r / W_r``: the decrease less the
node's ``W - Q / W`` (formed from its exact ``Q``), with three roundings whatever ``K`` (the splitter's
generic formula rounds ``K`` squares per side), so exactly equal partitions score exactly alike.

On a tie-free level where ``min_leaf`` cannot bind, Gini scores only the cuts where the class changes,
from the same sums over the runs of one class (:func:`gini_class_changes`; no cut inside a run is best).

Entropy: ``W i = W log W - sum_k c_k log c_k``, and the increments are ``f(b + w) - f(b)`` and ``f(a + w) -
f(a)`` with ``f(c) = c log c`` read from a table; these running sums are floating-point (one ``cumsum`` per
tree, as every float sum of the engine), so scores equal the splitter's up to rounding.

:func:`many_class_cut_scores` is shared by this fast path (numeric features, no missing values) and by the
categorical runs put in order (:mod:`.category_runs`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .chosen_decrease import run_decrease, splitter_decrease
from .class_ranks import cell_weight_through, class_ranks, class_weight_through
from .cuts import light_cuts, per_node, pick_cuts, record_cuts
from .presort import TrainingData
from .running import running_sums
from .splitter import CartSplitter, EntropySplitter, GiniSplitter
from .workspace import Workspace, scratch

__all__ = ["ManyClassPath", "entropy_table", "gini_class_changes", "many_class_applies", "many_class_cut_scores",
           "many_class_path", "splitter_decrease"]


def many_class_applies(data: TrainingData, splitter: CartSplitter) -> bool:
    """Whether the many-class search serves: built-in Gini or entropy, more than two classes (fewer than
    2**16), no case weights, and one-hot statistics."""
    return (type(splitter) in (GiniSplitter, EntropySplitter) and 2 < data.classes < (1 << 16)
            and data.weights is None and data.stats.shape[1] == 1 + data.classes)


def many_class_path(data: TrainingData, splitter: CartSplitter, counts: NDArray[np.uint8]) -> ManyClassPath:
    """The batch's counts and classes packed for the many-class search (``counts | class << 8``)."""
    packed = counts.astype(np.int32) | (data.target.astype(np.int32) << 8)[None, :]
    table = entropy_table(int(counts.sum(axis=1).max())) if type(splitter) is EntropySplitter else None
    return ManyClassPath("many_class", (packed.ravel(),), data, table)


def entropy_table(largest: int) -> NDArray[np.float64]:
    """``c log c`` for every count ``c`` from 0 to ``largest + 1`` (0 at 0)."""
    c = np.arange(largest + 2, dtype=np.float64)
    return c * np.log(np.where(c > 0, c, 1.0))


@dataclass(frozen=True)
class ManyClassPath:
    """A batch's statistics for the many-class search: ``columns[0]`` holds ``count | class << 8`` per
    (slot, row) (int32); ``table`` is ``c log c`` for every count ``c`` (entropy; None for Gini)."""

    kind: str
    columns: tuple[NDArray, ...]
    data: TrainingData
    table: NDArray[np.float64] | None = None

    def best_splits(self, seg, splitter: CartSplitter, min_leaf: float, lightest: float, items, parent, means, out,
                    tie: float, work: Workspace | None):
        """Fill ``out`` with the best split of every node of the sorted segments ``seg``; ``means`` holds the
        nodes' class weights, (nodes, classes), as the level's summaries summed them."""
        K = self.data.classes
        if self.table is None and seg.no_cut is None and min_leaf <= lightest:
            node_class = np.ascontiguousarray(means.T, dtype=np.int64).ravel()  # class-major (class, node)
            elem = scratch(work, "mc_elem32", seg.elements, np.int32)
            elem = (seg.item_values(np.take(self.columns[0], items.wi, mode="clip"), elem) if seg.by_item else
                    np.take(self.columns[0], seg.wi, out=elem, mode="clip"))
            return gini_class_changes(seg, splitter, elem, node_class, K, parent, out, tie, work)
        packed = np.take(self.columns[0], items.wi, mode="clip")  # the level's items' count | class << 8
        cell = items.node * K + (packed >> 8)
        node_class = means.astype(np.int64).ravel()  # (node, class)
        column = np.take(node_class, cell, mode="clip") << 24  # and the node's weight of the item's class
        column |= packed
        elem = scratch(work, "mc_elem", seg.elements, np.int64)
        if seg.by_item:
            elem = seg.item_values(column, elem)
        else:  # gathered by statistics index: the items' values put in place
            placed = scratch(work, "mc_placed", self.columns[0].size, np.int64)
            placed[items.wi] = column
            elem = np.take(placed, seg.wi, out=elem, mode="clip")
        L = elem.size
        cand = seg.int32_candidates(scratch(work, "mc_cand", L, np.int32))
        w = np.bitwise_and(elem, 0xFF, out=scratch(work, "mc_w", L, np.int32), casting="unsafe")
        y = np.bitwise_and(np.right_shift(elem, 8), 0xFFFF, out=scratch(work, "mc_y", L, np.int32), casting="unsafe")
        class_total = np.right_shift(elem, 24, out=elem)
        nodes, pick, decrease, sides = many_class_cut_scores(seg, cand, w, y, class_total, K, self.table, min_leaf,
                                                             lightest, parent, tie, work)
        chosen = seg.candidate(pick)
        decrease = splitter_decrease(splitter, seg, chosen, pick, w, y, K, parent[nodes])
        return record_cuts(seg, out, nodes, pick, decrease, sides[0] >= sides[1], chosen)

    def sides(self, items, K: int) -> NDArray[np.float64]:
        """Unused by this search (its node sums come from the items): zeros, shape (K, 3)."""
        return np.zeros((K, 3))

    def summaries(self, data: TrainingData, items, K: int, sides):
        """Case weight, per-class totals, leaf value (heaviest class, lowest on ties) and purity of every
        node, summed over its items (integer counts: exact, the same as the generic search's)."""
        packed = np.take(self.columns[0], items.wi, mode="clip")
        cell = items.node * data.classes + (packed >> 8)
        by_class = np.bincount(cell, weights=packed & 0xFF, minlength=K * data.classes).reshape(K, data.classes)
        weight = by_class.sum(axis=1)
        totals = np.column_stack([weight, by_class])
        heaviest = np.argmax(by_class, axis=1)
        pure = by_class[np.arange(K), heaviest] == weight  # (all of the weight in one class; exact sums)
        return weight, totals, heaviest.astype(np.float64), pure


def many_class_cut_scores(seg, cand, w, y, class_total, classes: int, table, min_leaf: float, lightest: float,
                          parent, tie: float, work: Workspace | None):
    """The best cut of every node from the elements' integer weights ``w``, classes ``y`` and their class's
    weight in the node, ``class_total`` (sorted segments ``seg``, ``cand`` each element's candidate;
    ``table`` as :class:`ManyClassPath`'s, None for Gini). Returns the nodes that have a cut, the cuts
    (elements), their decreases and the side weights ``(W_l, W_r)`` of each cut; the boundaries that are no
    valid cut are ``seg.no_cut``'s (and the segment ends)."""
    L = w.size
    before = class_ranks(w, y, cand, classes, work)
    sums = scratch(work, "mc_sums", 3 * L, np.int64 if table is None else np.float64).reshape(3, L)
    sums[0] = w
    if table is None:  # w (2 b + w) and w (2 a + w), with a = C - b - w after the element
        t = np.multiply(before, 2, out=scratch(work, "mc_t", L, np.int64))
        t += w
        np.multiply(t, w, out=sums[1])
        np.multiply(class_total, 2, out=sums[2])
        sums[2] -= t
        sums[2] *= w
    else:  # f(b + w) - f(b) and f(a + w) - f(a) = f(C - b) - f(C - b - w)
        t = np.add(before, w, out=scratch(work, "mc_t", L, np.int64))
        np.take(table, t, out=sums[1], mode="clip")
        sums[1] -= np.take(table, before, mode="clip")
        np.subtract(class_total, before, out=t)
        np.take(table, t, out=sums[2], mode="clip")
        t -= w
        sums[2] -= np.take(table, t, mode="clip")
    cs, totals = running_sums(sums, seg.start, seg.cand_tree, out=sums)
    wl, gain_l, gain_r = cs
    wr = _spread(totals[0], seg.size, cand, scratch(work, "mc_wr", L, totals.dtype))
    wr -= wl
    rest = _spread(totals[2], seg.size, cand, scratch(work, "mc_rest", L, totals.dtype))
    rest -= gain_r  # the right side's Q (or sum of c log c)
    light = light_cuts(seg, wl, wr, min_leaf, lightest)
    score = scratch(work, "mc_score", L, np.float64)
    node_first = seg.node_first
    with np.errstate(divide="ignore", invalid="ignore"):
        if table is None:  # Q_l / W_l + Q_r / W_r, the decrease less the node's W - Q / W
            np.divide(gain_l, wl, out=score)
            score += np.divide(rest, wr, out=scratch(work, "mc_tmp", L, np.float64))
            base = per_node(seg, parent, -totals[1, node_first] / totals[0, node_first])
            nodes, pick, decrease = pick_cuts(seg, parent, base, tie, score, light, work)
        else:  # the sums of c log c less W log W of each side: the decrease less the node's W i
            np.add(gain_l, rest, out=score)
            score -= np.take(table, wl.astype(np.int64), mode="clip")
            score -= np.take(table, wr.astype(np.int64), mode="clip")
            nodes, pick, decrease = pick_cuts(seg, parent, parent, tie, score, light, work)
    return nodes, pick, decrease, (wl[pick], wr[pick])


def gini_class_changes(seg, splitter: CartSplitter, elem, node_class, classes: int, parent, out, tie: float,
                       work: Workspace | None):
    """:meth:`ManyClassPath.best_splits` for Gini on a tie-free level where ``min_leaf`` cannot bind: only the
    cuts where the class changes are scored, from sums over the runs of one class.

    ``elem`` holds every element's ``count | class << 8`` (int32, overwritten), ``node_class`` the weight of
    every (class, node), class-major. Along a run of one class the Gini score is a strictly convex function of
    the weight moved left (``u + 2 d + (A + d**2) / u`` on each side, ``u`` the side's weight), and the
    decrease is 0 at a segment's ends, so no cut inside a run is best (Fayyad & Irani 1992, Theorem 1, for
    any number of classes; as :func:`.fast_search._class_changes` for two). A run of class ``k`` and weight ``r``
    preceded by ``b`` of its class in the segment adds ``r (2 b + r)`` to the left ``Q`` and takes ``r (2 a + r)``,
    ``a = C_k - b - r``, from the right one: the same integers the elements add one by one, so each scored
    cut scores as in :func:`many_class_cut_scores` bit for bit, and the class ranks sort the runs only.
    """
    L = elem.size
    wide = np.int32 if L * 255 < (1 << 31) else np.int64
    w = np.bitwise_and(elem, 0xFF, out=scratch(work, "mc_w", L, np.int32))
    y = (np.right_shift(elem, 8, out=scratch(work, "mc_y8", L, np.uint8), casting="unsafe") if classes <= 256
         else np.right_shift(elem, 8, out=elem))  # (one byte a class: a cheaper comparison, no cast to sort)
    change = scratch(work, "mc_change", L, np.bool_)
    np.not_equal(y[1:], y[:-1], out=change[:-1])
    seg_end = seg.start + seg.size - 1
    change[seg_end] = True
    ends = np.flatnonzero(change)  # the last element of every run of one class in a segment
    cw = np.cumsum(w, dtype=wide, out=scratch(work, "mc_cw", L, wide))  # the level's weight through each element
    upto = np.take(cw, ends, mode="clip")
    run_y = np.take(y, ends, mode="clip")
    last = np.searchsorted(ends, seg_end)  # (C,) the run ending each segment
    runs = np.diff(last, prepend=-1)
    first = last - runs + 1
    run_cand = np.repeat(np.arange(last.size), runs)
    by_class = node_class.reshape(classes, -1)  # (class, node)
    nodes = by_class.shape[1]
    node_w = by_class.sum(axis=0)
    seg_w = np.take(node_w, seg.cand_node, mode="clip")
    seg_q = np.take(np.einsum("kn,kn->n", by_class, by_class), seg.cand_node, mode="clip")  # the node's Q
    narrow = np.int32 if int(node_w.max()) <= _NARROW_WEIGHT else np.int64  # (every Q below 2**31)
    R = ends.size
    run_w = np.empty(R, dtype=narrow)  # every run's weight (runs never cross segments)
    run_w[0] = upto[0]
    np.subtract(upto[1:], upto[:-1], out=run_w[1:])
    through, twice_total = _run_class_weights(seg, run_w, run_y, run_cand, node_class, classes, narrow, work)
    # Q_l and Q_r as two integer running sums over the level, restarted at every segment: the left one less
    # the previous segment's Q at its first run, the right one from the segment's Q down (ending at 0)
    sums = scratch(work, "mc_sums", 2 * R, narrow).reshape(2, R)
    t = np.multiply(through, 2, out=sums[1], dtype=narrow, casting="unsafe")  # 2 s - r, s = b + r
    t -= run_w
    np.multiply(t, run_w, out=sums[0])  # r (2 b + r) = r (2 s - r)
    t -= twice_total
    t *= run_w  # -r (2 a + r) = r (2 (s - C) - r), a = C - s after it
    sums[0, first[1:]] -= seg_q[:-1].astype(narrow)
    sums[1, first] += seg_q.astype(narrow)
    q_l, q_r = np.cumsum(sums, axis=1, dtype=narrow, out=sums)
    # W_l, W_r from the level's running weight less (or from) its value at each segment's ends
    seg_hi = np.take(cw, seg_end, mode="clip")
    wr = _spread(seg_hi, runs, run_cand, scratch(work, "mc_wr", R, wide))
    wr -= upto
    seg_lo = seg_hi - seg_w.astype(wide)  # (every segment of a node holds all of its weight)
    wl = np.subtract(upto, _spread(seg_lo, runs, run_cand, scratch(work, "mc_lo", R, wide)), out=upto)
    score = scratch(work, "mc_score", R, np.float64)
    node_first = seg.node_first
    with np.errstate(divide="ignore", invalid="ignore"):
        np.divide(q_l, wl, out=score)
        score += np.divide(q_r, wr, out=scratch(work, "mc_tmp", R, np.float64))
        score[last] = -np.inf  # the segments' ends
        base = per_node(seg, parent, -seg_q[node_first] / seg_w[node_first])
        nodes, pick, _ = pick_cuts(seg, parent, base, tie, score, None, work, ends)
    cand, element = run_cand[pick], ends[pick]
    sides = wl[pick], wr[pick]
    decrease = run_decrease(splitter, first, runs, cand, pick, run_w, run_y, classes, parent[nodes],
                            np.take(by_class, nodes, axis=1, mode="clip").T, sides)
    return record_cuts(seg, out, nodes, element, decrease, sides[0] >= sides[1], cand)


def _run_class_weights(seg, run_w, run_y, run_cand, node_class, classes: int, narrow, work: Workspace | None):
    """Per run, the weight of its class in its segment up to and including it, and twice its class's weight
    in the node (``narrow`` integers).

    Where the (class, candidate) cells are no more than the runs, from a table of them
    (:func:`.class_ranks.cell_weight_through`: no (node, place) per run); else (deep levels of many small
    nodes) from the (class, node) cells and each candidate's place in its node
    (:func:`.class_ranks.class_weight_through`).
    """
    by_class = node_class.reshape(classes, -1)
    nodes, C = by_class.shape[1], seg.cand_node.size
    if C * classes <= run_w.size:
        cell_weight = np.take(by_class, seg.cand_node, axis=1, mode="clip").ravel()  # (class, candidate)
        cell = np.multiply(run_y, C, dtype=np.intp)
        cell += run_cand
        through = cell_weight_through(run_w, run_y, cell, cell_weight, classes, work)
        return through, np.take((2 * cell_weight).astype(narrow), cell, mode="clip")
    ncand = np.bincount(seg.cand_node, minlength=nodes)
    place = np.arange(C) - (np.cumsum(ncand) - ncand)[seg.cand_node]  # among the node's candidates
    at = np.take(np.stack([seg.cand_node, place], axis=1).astype(np.int32), run_cand, axis=0, mode="clip")
    cell = np.multiply(run_y, nodes, dtype=np.intp)  # (gathers cast narrower indices first)
    cell += at[:, 0]
    class_total = np.take(node_class.astype(narrow), cell, mode="clip")
    through = class_weight_through(run_w, run_y, cell, at[:, 1], class_total, node_class, ncand, classes, work)
    class_total += class_total
    return through, class_total


#: Largest node weight for int32 sums of squared class weights (``46340**2 < 2**31``)
_NARROW_WEIGHT = 46_340


def _spread(values, count, owner, out):
    """Every entry's candidate's value of ``values`` (one per candidate), into ``out``: repeated ``count``
    times (each candidate's entries: elements or runs) where candidates average 12 entries or more, else
    gathered by ``owner``, the candidate of every entry."""
    if values.size * 12 <= out.size:
        out[:] = np.repeat(values, count)
        return out
    return np.take(values, owner, out=out, mode="clip")
