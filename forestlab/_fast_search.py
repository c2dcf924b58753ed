"""Fast paths of the exact best-split search for the built-in splitters (no missing values or categories).

Both score every element of the sorted segments and mask the boundaries that are no valid cut, which saves
the gathers at the cuts, and keep their large temporaries in the batch's scratch buffers.

*Two classes* (Gini or entropy, no case weights): every summed statistic is
an integer count, so the two channels the search needs, the bootstrap weight ``W`` and the class-1 count
``c1``, travel packed in one int64 (``W + c1 * 2**32``): one gather, one integer ``cumsum`` (exact, so in any
order), and ``c0 = W - c1``. Entropy is then computed from the same float values, with the same operations
in the same order, as the generic path, so its splits and scores are bit-identical; Gini takes the shorter
``W i = 2 c0 c1 / W``, equal to the generic value up to its rounding (so the chosen split can differ only
between splits whose scores differ by about the tie tolerance).

*Squared error*: the running sums of the case weight and of the weighted centred target only (no second
moment), and the classic decrease ``S_l**2 / W_l + S_r**2 / W_r - S**2 / W``; equal to the generic score up
to rounding.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ._presort import TrainingData
from ._running import running_sums
from ._splitter import CartSplitter, EntropySplitter, GiniSplitter, SquaredErrorSplitter
from ._workspace import Workspace, scratch

__all__ = ["FastPath", "binary_best_splits", "binary_summaries", "fast_path", "squared_error_best_splits"]

@dataclass(frozen=True)
class FastPath:
    """A batch's statistics packed for one of the specialised searches, one entry per (slot, row).

    ``kind`` is ``"binary"`` (``columns = (W + c1 * 2**32,)``, int64) or ``"squared_error"`` (``columns =
    (W, S1)``: the case weight, int64 bootstrap counts when there are no case weights, and the weighted
    centred target).
    """

    kind: str
    columns: tuple[NDArray, ...]

    def best_splits(self, seg, splitter: CartSplitter, min_leaf: float, lightest: float, items, parent, out,
                    tie: float, work: Workspace | None):
        """Fill ``out`` with the best split of every node of the sorted segments ``seg``."""
        columns = [np.take(c, items.wi) for c in self.columns]
        if self.kind == "binary":
            return binary_best_splits(seg, splitter, min_leaf, lightest, *columns, parent, out, tie, work)
        return squared_error_best_splits(seg, min_leaf, lightest, *columns, parent, out, tie, work)


def fast_path(data: TrainingData, splitter: CartSplitter, counts: NDArray[np.uint8],
              stats: NDArray[np.float64]) -> FastPath | None:
    """The specialised search for this batch, or None when only the generic one applies (user splitters,
    more classes, missing values, categories, and case weights with two classes)."""
    if data.missing or data.category_words:
        return None
    if (type(splitter) in (GiniSplitter, EntropySplitter) and data.classes == 2 and data.weights is None
            and data.stats.shape[1] == 3):
        w = counts.astype(np.int64)
        return FastPath("binary", ((w + ((w * (data.target == 1)) << 32)).ravel(),))
    if type(splitter) is SquaredErrorSplitter:
        weight = counts.astype(np.int64).ravel() if data.weights is None else stats[0]
        return FastPath("squared_error", (weight, stats[1]))
    return None


def _weighted_impurity(entropy: bool, W, c1, out, tmp):
    """``W * i`` for Gini or entropy of ``[W, W - c1, c1]``, with the built-in splitters' operations in their
    order (so bit-identical to them); written to ``out``, ``tmp`` is scratch."""
    p0 = np.divide(np.subtract(W, c1, out=out), W, out=out)
    p1 = np.divide(c1, W, out=tmp)
    if entropy:
        s = np.multiply(p0, np.log(np.where(p0 > 0.0, p0, 1.0)), out=p0)
        s += p1 * np.log(np.where(p1 > 0.0, p1, 1.0))
        np.negative(s, out=s)
    else:
        s = np.multiply(p0, p0, out=p0)
        s += np.multiply(p1, p1, out=p1)
        np.subtract(1.0, s, out=s)
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


def binary_summaries(packed, node, K: int):
    """Case weight, totals ``[W, c0, c1]``, leaf class and purity of every node, from the packed counts of the
    level's items (``node`` their nodes): integers all, so equal to the generic summaries."""
    low, high = _halves(packed)
    weight = np.bincount(node, weights=low, minlength=K)
    c1 = np.bincount(node, weights=high, minlength=K)
    c0 = weight - c1
    value = (c1 > c0).astype(np.float64)  # the heavier class, the lower one on ties
    return weight, np.column_stack([weight, c0, c1]), value, (c0 == 0) | (c1 == 0)


def binary_best_splits(seg, splitter, min_leaf: float, lightest: float, packed, parent, out, tie: float,
                       work: Workspace | None = None):
    """Fill ``out`` (a ``Splits``) with the best split of every node of the sorted segments ``seg``;
    ``packed`` holds the packed statistics of the level's items."""
    L = seg.item.size
    elem = np.take(packed, seg.item, out=scratch(work, "elem", L, np.int64), mode="clip")
    total = np.add.reduceat(elem, seg.start)
    elem[seg.start[1:]] -= total[:-1]
    left = np.cumsum(elem, out=elem)
    right = np.take(total, seg.cand_of, out=scratch(work, "right", L, np.int64), mode="clip")
    right -= left
    entropy = type(splitter) is EntropySplitter
    with np.errstate(divide="ignore", invalid="ignore"):
        wl, cl = _unpack(left, work, ("wl", "cl"))
        wr, cr = _unpack(right, work, ("wr", "cr"))
        score = np.take(parent[seg.cand_node], seg.cand_of, out=scratch(work, "score", L, np.float64), mode="clip")
        tmp = scratch(work, "tmp1", L, np.float64)
        if entropy:
            score -= _weighted_impurity(entropy, wl, cl, scratch(work, "imp", L, np.float64), tmp)
            score -= _weighted_impurity(entropy, wr, cr, scratch(work, "imp", L, np.float64), tmp)
        else:
            score -= _weighted_gini_children(wl, cl, wr, cr, scratch(work, "imp", L, np.float64), tmp)
    return _pick(seg, min_leaf, lightest, parent, out, tie, work, score, wl, wr)


def _weighted_gini_children(wl, cl, wr, cr, out, tmp):
    """``W_l i(l) + W_r i(r)`` for two-class Gini: ``W (1 - p0**2 - p1**2) = 2 c0 c1 / W``, from the exact
    integer counts (as floats; products exact below 2**53), so with one rounding per side."""
    left = np.subtract(wl, cl, out=out)
    left *= cl
    left /= wl
    right = np.subtract(wr, cr, out=tmp)
    right *= cr
    right /= wr
    left += right
    left *= 2.0
    return left


def squared_error_best_splits(seg, min_leaf: float, lightest: float, weight, first, parent, out, tie: float,
                              work: Workspace | None):
    """As :func:`binary_best_splits` for the squared-error splitter, from the case weight ``W`` and the
    weighted centred target ``S`` of the level's items.

    The decrease of the within-node sum of squares of a cut is ``S_l**2 / W_l + S_r**2 / W_r - S**2 / W``
    (Breiman et al. 1984, section 8.3), the squared-error splitter's score up to rounding, so only the
    running sums of ``W`` (integers without case weights: exact) and ``S`` are needed.
    """
    L = seg.item.size
    w = np.take(weight, seg.item, out=scratch(work, "w", L, weight.dtype), mode="clip")
    s = np.take(first, seg.item, out=scratch(work, "s", L, np.float64), mode="clip")
    left_w, total_w = running_sums(w, seg.start, seg.cand_tree, scratch(work, "left_w", L, weight.dtype))
    left_s, total_s = running_sums(s, seg.start, seg.cand_tree, scratch(work, "left_s", L, np.float64))
    right_w = np.take(total_w, seg.cand_of, out=w, mode="clip")
    right_w -= left_w
    right_s = np.take(total_s, seg.cand_of, out=s, mode="clip")
    right_s -= left_s
    if weight.dtype != np.float64:
        left_w = _as_float(left_w, scratch(work, "wl", L, np.float64))
        right_w = _as_float(right_w, scratch(work, "wr", L, np.float64))
    with np.errstate(divide="ignore", invalid="ignore"):
        score = np.multiply(left_s, left_s, out=scratch(work, "score", L, np.float64))
        score /= left_w
        tmp = np.multiply(right_s, right_s, out=scratch(work, "tmp1", L, np.float64))
        tmp /= right_w
        score += tmp
        score -= np.take(total_s * total_s / total_w, seg.cand_of, out=tmp, mode="clip")
    return _pick(seg, min_leaf, lightest, parent, out, tie, work, score, left_w, right_w)


def _as_float(values, out):
    np.copyto(out, values, casting="unsafe")
    return out


def _pick(seg, min_leaf, lightest, parent, out, tie, work, score, wl, wr):
    """Mask the invalid boundaries, then record the first best-scoring cut of every node in ``out``."""
    L = seg.item.size
    invalid = scratch(work, "valid", L, np.bool_)
    np.equal(seg.code[1:], seg.code[:-1], out=invalid[:-1])
    invalid[-1] = True
    invalid[seg.start[1:] - 1] = True
    if min_leaf > lightest:
        invalid |= wl < min_leaf
        invalid |= wr < min_leaf
    np.putmask(score, invalid, -np.inf)
    node_first, nodes = seg.node_first, seg.cand_node[seg.node_first]
    if not np.all(seg.size > 0):
        return _pick_elementwise(seg, parent, out, tie, work, score, wl, wr, node_first, nodes)
    top = np.maximum.reduceat(score, seg.start)
    best = np.maximum.reduceat(top, node_first)
    with np.errstate(invalid="ignore"):
        bar = best - tie * np.maximum(np.abs(best), np.abs(parent[nodes]))
    found = best > -np.inf
    pick = _first_reaching(seg.start, seg.size, score, top, bar, node_first, found)
    return record_cuts(seg, out, nodes[found], pick, score[pick], wl[pick] >= wr[pick])


def _first_reaching(start, size, score, top, bar, node_first, found):
    """Per found node, the first element of its segments whose score reaches the node's ``bar``: the first
    candidate whose segment maximum reaches it, then the first element of that segment alone."""
    with np.errstate(invalid="ignore"):
        reach = np.flatnonzero(top >= bar[run_ids(np.diff(np.append(node_first, top.size)))])
    cand = reach[np.searchsorted(reach, node_first[found])]
    bar = bar[found]
    width = size[cand]
    offset = np.cumsum(width) - width
    run = run_ids(width)
    elem = np.arange(run.size) + (start[cand] - offset)[run]
    hit = np.flatnonzero(score[elem] >= bar[run])
    return elem[hit[np.searchsorted(hit, offset)]]


def run_ids(sizes: NDArray[np.int64]) -> NDArray[np.int64]:
    """``np.repeat(np.arange(sizes.size), sizes)`` for positive sizes, by one ``cumsum`` (``np.repeat`` is
    slow for many short runs)."""
    ids = np.zeros(int(sizes.sum()), dtype=np.int64)
    ids[np.cumsum(sizes[:-1])] = 1
    return np.cumsum(ids, out=ids)


def _pick_elementwise(seg, parent, out, tie, work, score, wl, wr, node_first, nodes):
    """:func:`_pick`'s choice by a pass over all elements (any segment may be empty)."""
    L = seg.item.size
    starts = seg.start[node_first]
    best = np.maximum.reduceat(score, starts)
    with np.errstate(invalid="ignore"):
        bar = best - tie * np.maximum(np.abs(best), np.abs(parent[nodes]))
    node_of_cand = np.zeros(seg.cand_node.size, dtype=np.int64)
    node_of_cand[node_first[1:]] = 1
    node_of = np.take(np.cumsum(node_of_cand), seg.cand_of, out=scratch(work, "node_of", L, np.int64), mode="clip")
    barred = np.take(bar, node_of, out=scratch(work, "tmp1", L, np.float64), mode="clip")
    tied = np.flatnonzero(np.greater_equal(score, barred, out=scratch(work, "valid", L, np.bool_)))
    pick = tied[np.searchsorted(tied, starts)]
    found = best > -np.inf
    nodes, pick = nodes[found], pick[found]
    return record_cuts(seg, out, nodes, pick, score[pick], wl[pick] >= wr[pick])


def record_cuts(seg, out, nodes, element, decrease, heavier_left):
    """Write the cut after sorted ``element`` of each of ``nodes`` into ``out``: its feature, the midpoint of
    the neighbouring distinct values as threshold (the lower value where the midpoint rounds onto the upper
    one), the decrease, and missing values sent to the heavier child."""
    lo, hi = seg.values(element), seg.values(element + 1)
    threshold = 0.5 * lo + 0.5 * hi
    out.found[nodes] = True
    out.feature[nodes] = seg.cand_feat[seg.cand_of[element]]
    out.threshold[nodes] = np.where((threshold < hi) & (threshold >= lo), threshold, lo)
    out.decrease[nodes] = decrease
    out.missing_left[nodes] = heavier_left
    return out
