"""Fast paths of the exact best-split search for the built-in splitters (no missing values or categories).

Both score the elements of the sorted segments, mask the boundaries that are no valid cut (no gathers at
the cuts) and keep large temporaries in the batch's scratch buffers; many classes: ``many_class.py``;
the squared-error search itself is in ``squared_error.py``.

*Two classes* (Gini or entropy, no case weights): every summed statistic is an integer count, so the two
channels the search needs, the bootstrap weight ``W`` and the class-1 count ``c1``, travel packed in one int64
(``W + c1 * 2**32``): one gather, one integer ``cumsum`` (exact, so in any order), and ``c0 = W - c1``.
Entropy is computed with the entropy splitter's own operations. Gini uses ``W i = 2 c0 c1 / W = 2 (c1 -
c1**2 / W)``, so a cut scores ``c1_l**2 / W_l + c1_r**2 / W_r`` (two divisions per element), half the
decrease plus the node's ``c1**2 / W``; equal to the generic value up to rounding. Where ``min_leaf`` cannot
bind, only the cuts between cases of different classes are scored (:func:`_class_changes`, with ties
:func:`_class_boundaries`: no other cut can be best). Scores are relative to the node, so the chosen split
can differ from the generic search's only between splits whose scores differ by about the tie tolerance.

*Squared error*: the running sums of the case weight and of the weighted target, centred on each node's
mean, only (no second moment), and the decrease ``W * S_l**2 / (W_l * W_r)`` (the classic ``S_l**2 / W_l +
S_r**2 / W_r - S**2 / W`` with ``S = 0``); equal to the generic score up to rounding, and free of its
cancellation where a node's mean lies far from the data's. The two channels travel as one complex number
``W + 1j * S``: one gather and one ``cumsum`` serve both (a complex addition adds the parts separately, so
the sums are those of each channel alone, and integer ``W`` stays exact as a float).
"""

from __future__ import annotations

import sys
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .category_runs import category_runs_path
from .cuts import light_cuts, per_node, pick_cuts, record_cuts, record_sides, segment_totals
from .many_class import ManyClassPath, many_class_applies, many_class_path
from .presort import TrainingData
from .running import running_sums
from .elements import gather
from .splitter import CartSplitter, EntropySplitter, GiniSplitter, SquaredErrorSplitter
from .squared_error import squared_error_best_splits, summed_moments, summed_weights
from .workspace import Workspace, scratch

__all__ = ["FastPath", "MOMENTS_COLUMN_ENTRIES", "binary_best_splits", "fast_path", "squared_error_best_splits"]

#: Entries (trees x rows) of a squared-error batch above which its node sums form each item's target and square
#: when needed (:func:`.squared_error.summed_moments`; 16 bytes an entry less, 0.2x X at p = 10), not a column
MOMENTS_COLUMN_ENTRIES = 1 << 19


@dataclass(frozen=True)
class FastPath:
    """A batch's statistics packed for one of the specialised searches, one entry per (slot, row).

    ``kind`` is ``"binary"`` (``columns = (W + c1 * 2**32,)``, int64) or ``"squared_error"`` (``columns =
    (W + 1j * S1, S1 + 1j * S2)`` and, with case weights, ``W`` last: the case weight (the bootstrap count
    when there are no case weights) and the weighted centred target as one complex128 for the search, the
    weighted centred target and its square as another for the node sums (both parts added with one gather
    and one ``np.add.at``), and the weight as a contiguous float64). A batch of more than
    :data:`MOMENTS_COLUMN_ENTRIES` holds no second column (None; :func:`.squared_error.summed_moments`).
    """

    kind: str
    columns: tuple[NDArray, ...]
    data: TrainingData
    centre: float = 0.0  # squared error: the mean the statistics are centred on
    counts: NDArray[np.uint8] | None = None  # squared error without its second column: the in-bag counts

    def best_splits(self, seg, splitter: CartSplitter, min_leaf: float, lightest: float, items, parent, means, out,
                    tie: float, work: Workspace | None, carry=None):
        """Fill ``out`` with the best split of every node of the sorted segments ``seg`` (``means``: each
        node's summed first statistic over its weight, which the squared-error search centres on; ``carry``:
        the floating-point running sums of the blocks of the level before this one, :func:`.running_sums`)."""
        column = self.columns[0]
        by_item = seg.by_item
        if by_item or self.kind == "squared_error":  # the level's items' values
            column = np.take(column, items.wi, mode="clip")
        if self.kind == "squared_error":  # each item's target centred on its node's mean
            column.imag -= column.real * np.take(means, items.node, mode="clip")
            if not by_item:  # gathered by statistics index below: the centred values put in place
                placed = scratch(work, "centred", self.columns[0].size, column.dtype)
                placed[items.wi] = column
                column = placed
        L = seg.elements
        # squared error: a fresh array, not a scratch buffer (the allocator hands back memory freed moments ago,
        # still in the cache, where a buffer last written a level ago is not; 0.93-0.99x the fit, paired)
        buffer = np.empty(L, column.dtype) if self.kind == "squared_error" else scratch(work, "elem", L, column.dtype)
        elem = seg.item_values(column, buffer) if by_item else gather(column, seg.wi, buffer)
        del column  # (the items' values: not held through the search)
        if self.kind == "binary":
            return binary_best_splits(seg, splitter, min_leaf, lightest, elem, parent, out, tie, work)
        return squared_error_best_splits(seg, min_leaf, lightest, elem, parent, out, tie, work,
                                         whole_weights=self.data.weights is None, carry=carry)

    def sides(self, items, K: int) -> NDArray[np.float64]:
        """What :meth:`summaries` reads from the parents' cuts, summed over the items instead (K, 3): the
        weight, the class-1 count (two classes; 0 otherwise) and the number of items of every node."""
        out = np.zeros((K, 3))
        if self.kind == "binary":
            low, high = _halves(np.take(self.columns[0], items.wi, mode="clip"))
            out[:, 0] = np.bincount(items.node, weights=low, minlength=K)
            out[:, 1] = np.bincount(items.node, weights=high, minlength=K)
        elif self.data.weights is None:  # (with case weights the summaries sum the weights themselves)
            out[:, 0] = summed_weights(self.columns[0], items, K)
        out[:, 2] = np.bincount(items.node, minlength=K)
        return out

    def summaries(self, data: TrainingData, items, K: int, sides: NDArray[np.float64]):
        """Case weight, totals, leaf value and purity of every node of a level, with the weights, class-1
        counts and item counts from its parents' ``sides`` (``Splits.sides`` of the split nodes, children in
        order, shape (K, 3))."""
        weight, summed, count = sides[:, 0], sides[:, 1], sides[:, 2]
        if self.kind == "binary":
            totals = np.empty((weight.size, 3))
            totals[:, 0], totals[:, 2] = weight, summed
            c0 = np.subtract(weight, summed, out=totals[:, 1])
            return weight, totals, (summed > c0).astype(np.float64), (c0 == 0) | (summed == 0)
        # floating-point sums from the items, not from the parent's running sums (those carry the rounding of
        # the segments before theirs); the weights are the parent's when they are integers (no case weights)
        moments = (summed_moments(self.columns[0], self.counts, data.stats, items, K) if self.columns[1] is None
                   else _summed(items.node, np.take(self.columns[1], items.wi, mode="clip"), K))
        if data.weights is not None:
            weight = _summed(items.node, np.take(self.columns[2], items.wi, mode="clip"), K)
        summed, second = moments.real, moments.imag
        value = summed / weight + self.centre
        return weight, np.column_stack([weight, summed, second]), value, data.equal_targets(items.row, items.node,
                                                                                             K, count)


def fast_path(data: TrainingData, splitter: CartSplitter,
              counts: NDArray[np.uint8]) -> FastPath | ManyClassPath | None:
    """The specialised search for this batch, or None when only the generic one applies (user splitters,
    missing values, categories, case weights with two or more classes; more classes take
    :mod:`.many_class`'s search)."""
    if data.missing:
        return None
    if data.category_words:  # many classes: the categorical runs put in order (:mod:`.category_runs`)
        return category_runs_path(data, splitter, counts) if many_class_applies(data, splitter) else None
    if (type(splitter) in (GiniSplitter, EntropySplitter) and data.classes == 2 and data.weights is None
            and data.stats.shape[1] == 3):
        w = counts.astype(np.int64)
        return FastPath("binary", ((w + ((w * (data.target == 1)) << 32)).ravel(),), data)
    if many_class_applies(data, splitter):
        return many_class_path(data, splitter, counts)
    if type(splitter) is SquaredErrorSplitter:
        weight = counts if data.weights is None else counts * data.stats[:, 0]
        first = counts * data.stats[:, 1]
        ws = np.empty(counts.shape, dtype=np.complex128)
        ws.real, ws.imag = weight, first
        if counts.size > MOMENTS_COLUMN_ENTRIES and data.stats.flags.c_contiguous:
            del first
            moments, held = None, counts
        else:
            moments, held = np.empty(counts.shape, dtype=np.complex128), None
            moments.real, moments.imag = first, counts * data.stats[:, 2]
            moments = moments.ravel()
        columns = (ws.ravel(), moments)
        if data.weights is not None:
            columns += (np.ravel(weight),)
        return FastPath("squared_error", columns, data, float(data.target.mean()), held)
    return None


def _summed(node: NDArray[np.int64], values: NDArray, K: int) -> NDArray:
    """``np.bincount(node, weights=values, minlength=K)`` by ``np.add.at``: the same additions in the same
    order (each node's values in item order, from 0), so the same sums bit for bit; complex ``values`` give
    the sums of both parts at once (a complex addition adds the parts apart). Target and square together:
    1.8-1.9 ns an item against 3.7-3.8 for two ``bincount`` (AMD EPYC family 26, 63 000 items, 64-8 192
    nodes; 2.8 for two float ``np.add.at``)."""
    out = np.zeros(K, dtype=values.dtype)
    np.add.at(out, node, values)
    return out


def _weighted_entropy(W, c1, out, tmp):
    """``W * i`` for the entropy of ``[W, W - c1, c1]``, with the entropy splitter's operations in its order
    (the same impurity values); written to ``out``, ``tmp`` is scratch."""
    p0 = np.divide(np.subtract(W, c1, out=out), W, out=out)
    p1 = np.divide(c1, W, out=tmp)
    s = np.multiply(p0, np.log(np.where(p0 > 0.0, p0, 1.0)), out=p0)
    s += p1 * np.log(np.where(p1 > 0.0, p1, 1.0))
    np.negative(s, out=s)
    np.maximum(s, 0.0, out=s)
    s *= W
    return s


def _halves(v):
    """Views of the low (``W``) and high (``c1``) 32-bit halves of packed int64 values (both below 2**31:
    ``W`` is at most the sample size)."""
    halves = v.view(np.int32).reshape(-1, 2)
    return (halves[:, 0], halves[:, 1]) if sys.byteorder == "little" else (halves[:, 1], halves[:, 0])


def _unpack(v, work: Workspace | None, names: tuple[str, str]):
    """(W, c1) of packed values, as float64 (scratch) arrays."""
    low, high = _halves(v)
    w = scratch(work, names[0], v.size, np.float64)
    np.copyto(w, low, casting="unsafe")
    c = scratch(work, names[1], v.size, np.float64)
    np.copyto(c, high, casting="unsafe")
    return w, c


def binary_best_splits(seg, splitter, min_leaf: float, lightest: float, elem, parent, out, tie: float,
                       work: Workspace | None = None):
    """Fill ``out`` (a ``Splits``) with the best split of every node of the sorted segments ``seg``;
    ``elem`` holds the packed statistics of its elements (overwritten).

    Where no cut can leave a side too light, only the cuts between two cases of different classes are scored
    (:func:`_class_changes`; with ties, :func:`_class_boundaries`).
    """
    at = None
    if min_leaf <= lightest:
        at = _class_changes(seg, elem, work) if seg.no_cut is None else _class_boundaries(seg, elem, work)
    if at is None:  # every element: the codes are spent (a gather by candidate reads them first), so the
        # segment totals reuse their buffer
        cand_at = None
        left, total = running_sums(elem, seg.start, seg.cand_tree, out=elem)
        right = segment_totals(seg, total, work, seg.spare_codes())
    else:
        cand_at = seg.candidates_at(at)
        left, total = _sums_at(seg, elem, at, cand_at, work)
        # the running sums are spent: where they fit, the right sums and the scores take their buffer
        spare = elem if 2 * at.size <= elem.size else None
        right = total.take(cand_at, mode="clip", out=scratch(work, "right_at", at.size, total.dtype)
                        if spare is None else spare[:at.size])
    right -= left
    (wl, cl), (wr, cr) = _halves(left), _halves(right)
    light = light_cuts(seg, wl, wr, min_leaf, lightest)  # (None where ``at`` is used: min_leaf cannot bind)
    size = left.size
    with np.errstate(divide="ignore", invalid="ignore"):
        score = scratch(work, "score", size, np.float64) if at is None or spare is None else \
            spare[size:2 * size].view(np.float64)
        if type(splitter) is EntropySplitter:  # minus the children's W i: the decrease less W_t i(t)
            tmp = scratch(work, "tmp1", size, np.float64)
            wl, cl = _unpack(left, work, ("wl", "cl"))
            wr, cr = _unpack(right, work, ("wr", "cr"))
            np.negative(_weighted_entropy(wl, cl, score, tmp), out=score)
            score -= _weighted_entropy(wr, cr, scratch(work, "imp", size, np.float64), tmp)
            nodes, pick, decrease = pick_cuts(seg, parent, parent, tie, score, light, work, at)
        else:  # half the Gini decrease less the node's constant; the left sums are spent once divided
            _half_gini_score(wl, cl, score)
            score += _half_gini_score(wr, cr, left.view(np.float64))
            node_w, node_c1 = _halves(total[seg.node_first])
            base = per_node(seg, parent, -np.square(node_c1, dtype=np.float64) / node_w)
            nodes, pick, decrease = pick_cuts(seg, 0.5 * parent, base, tie, score, light, work, at)
            decrease *= 2.0
    element = pick if at is None else at[pick]
    cand = seg.candidate(element) if cand_at is None else cand_at[pick]
    right_at = right[pick]
    (wr, cr), (wl, cl) = _halves(right_at), _halves(total[cand] - right_at)  # exact: the left sums are spent
    record_sides(seg, out, nodes, element, cand, (wl, cl), (wr, cr))
    return record_cuts(seg, out, nodes, element, decrease, wl >= wr, cand)


def _class_changes(seg, elem, work: Workspace | None) -> NDArray[np.intp]:
    """The elements followed, in the same segment, by a case of the other class (the packed ``elem`` of
    :func:`binary_best_splits`, before its running sums).

    For two classes and a strictly concave impurity (Gini, entropy), a cut inside a run of cases of one
    class scores strictly less than one of the run's ends (Fayyad & Irani 1992, "On the handling of
    continuous-valued attributes in decision tree generation", Machine Learning 8, Theorem 1; Breiman 1996,
    "Some properties of splitting criteria", Machine Learning 24): along the run the decrease is a strictly
    convex function of the weight moved left. So where all values differ, the best cut lies between two
    cases of different classes. Such boundaries are a fraction of the elements (14-30% in the benchmark
    problems), and only they are scored. (A cut inside a run can come within the tie tolerance of the best
    only where the two differ by less than 1e-12 relative in exact arithmetic; the search that scores every
    cut would take it if it came first, this one does not.)
    """
    L = elem.size
    is_one = _is_one(elem, work)
    change = scratch(work, "no_cut", L, np.bool_)
    np.not_equal(is_one[1:], is_one[:-1], out=change[:-1])
    change[-1] = False
    change[seg.start[1:] - 1] = False
    return change.nonzero()[0]


def _class_boundaries(seg, elem, work: Workspace | None) -> NDArray[np.intp]:
    """:func:`_class_changes` for a level with ties: the valid cuts (between distinct values, inside a
    segment) except those between two groups of equal values that hold one and the same class only.

    Such a cut lies inside a run of one class of the sequence of value groups, where the decrease is again
    strictly convex in the weight moved left, so it is not best (the boundary points of Fayyad & Irani 1992,
    who treat equal values this way).
    """
    is_one = _is_one(elem, work)
    # the last element of every group of equal values but the level's last (``no_cut`` is spent)
    ends = np.flatnonzero(np.logical_not(seg.no_cut, out=seg.no_cut))
    starts = np.empty(ends.size + 1, dtype=np.intp)
    starts[0] = 0
    starts[1:] = ends + 1
    all_one = np.logical_and.reduceat(is_one, starts)
    none_one = np.logical_not(np.logical_or.reduceat(is_one, starts))
    keep = ~((all_one[:-1] & all_one[1:]) | (none_one[:-1] & none_one[1:]))
    keep[np.searchsorted(ends, seg.start[1:] - 1)] = False  # segment ends (the codes differ there too)
    return ends[keep]


def _is_one(elem, work: Workspace | None) -> NDArray[np.bool_]:
    """Whether each packed element holds class-1 cases: ``c1 > 0``, so the value reaches ``2**32`` (compared
    as int64: 0.3 against 1.2 ns an element for the strided int32 half on the Intel test machine)."""
    return np.greater(elem, 0xFFFFFFFF, out=scratch(work, "is_one", elem.size, np.bool_))


def _sums_at(seg, elem, at, cand_at, work: Workspace | None):
    """The running sums of the packed ``elem`` (overwritten) at the elements ``at`` of candidates
    ``cand_at``, restarted at every segment, and every segment's total.

    Integer sums are exact in any order, so one ``cumsum`` over the whole level serves, and each segment's
    sums are those less the sum before the segment: no pass restarts them (as :func:`.running_sums` must for
    every element). The level's sum stays packed: every item weighs at most 255 (a ``uint8`` count), so both
    halves stay below ``2**31`` on levels of fewer than ``2**31 / 255`` elements (larger ones take
    :func:`.running_sums`).
    """
    if elem.size >= _PACKED_LEVEL_LIMIT:
        left, total = running_sums(elem, seg.start, seg.cand_tree, out=elem)
        return np.take(left, at, mode="clip"), total
    running = elem.cumsum(out=elem)
    end = running.take(seg.start + seg.size - 1, mode="clip")
    before = np.concatenate(([0], end[:-1]))  # the sum up to each segment: the previous one's end
    left = running.take(at, out=scratch(work, "left_at", at.size, running.dtype), mode="clip")
    left -= before.take(cand_at, mode="clip")
    return left, end - before


#: Levels of at least this many elements keep their packed running sums restarted per segment
_PACKED_LEVEL_LIMIT = (1 << 31) // 255


def _half_gini_score(W, c1, out):
    """``c1**2 / W`` into ``out`` from the exact integer counts (int32 views; the square is formed in floats,
    exact below 2**53), so with one rounding.

    Two-class Gini gives ``W i = 2 c0 c1 / W = 2 (c1 - c1**2 / W)``, so a cut's decrease is ``2 (c1_l**2 / W_l
    + c1_r**2 / W_r - c1**2 / W)``: half of it, less the node's constant, is the sum of this over the sides.
    ``c1`` is converted once and squared in place (1.9-2.1 ns an element on the Intel test machine, against
    2.8 for a multiply that converts both of its operands).
    """
    np.copyto(out, c1, casting="unsafe")
    np.square(out, out=out)
    out /= W
    return out
