"""Picking and recording the best cut of every node, shared by the fast searches and the generic one.

A cut is valid where ``min_leaf`` leaves enough weight on both sides (:func:`light_cuts`); the best valid cut
of a node (scores within the tie tolerance count as equal: then the lowest feature, then the smallest
threshold) is picked per node (:func:`pick_cuts`) and written into the level's ``Splits`` (:func:`record_cuts`).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .workspace import Workspace, scratch

__all__ = ["light_cuts", "light_reach", "per_node", "pick_cuts", "record_cuts", "record_sides", "segment_ends",
           "segment_totals"]


def light_cuts(seg, wl, wr, min_leaf: float, lightest: float):
    """The cuts that leave less than ``min_leaf`` on a side: None (none can: every item weighs more), their
    elements, or a mask over all elements.

    Every item weighs at least ``lightest``, so only the first ``r = ceil(min_leaf / lightest)`` elements of a
    segment can have a light left side and only its last ``r + 1`` a light right side. Where segments are
    long, only those are checked.
    """
    if min_leaf <= lightest:
        return None
    reach = light_reach(seg, wl.size, min_leaf, lightest)
    if reach == 0:
        return np.minimum(wl, wr) < min_leaf
    ends = segment_ends(seg, reach)
    return ends[np.minimum(wl[ends], wr[ends]) < min_leaf]


def light_reach(seg, L: int, min_leaf: float, lightest: float) -> int:
    """How many elements at each end of a segment :func:`light_cuts` checks (``r = ceil(min_leaf /
    lightest)``), or 0 where every element is checked (segments short beside ``r``); ``min_leaf >
    lightest``."""
    reach = int(np.ceil(min_leaf / lightest))
    return 0 if 4 * seg.start.size * (2 * reach + 1) >= L else reach


def segment_ends(seg, reach: int) -> NDArray[np.int64]:
    """The first ``reach`` and the last ``reach + 1`` elements of every segment (each once where they
    overlap: first ones, then last ones)."""
    lead = seg.start[:, None] + np.arange(reach)
    trail = (seg.start + seg.size - 1)[:, None] - np.arange(reach + 1)
    return np.concatenate([lead[lead < (seg.start + seg.size)[:, None]], trail[trail >= seg.start[:, None]]])


def segment_totals(seg, total: NDArray, work: Workspace | None = None, out: NDArray | None = None) -> NDArray:
    """Every element's segment total, in ``out`` if given (a buffer it may be written to), else in a scratch
    buffer of ``work`` or a new array.

    Where segments average 12 elements or more, ``total`` is repeated over them (``np.repeat`` copies runs:
    0.6-1.2 ns an element at 16-32 against 4 ns at 2 on the Intel test machine); on large levels a few
    ten thousand elements at a time into the buffer, so that no level-sized temporary is made. Else one
    gather by candidate (about 1.2-1.6 ns an element with the shift that forms the candidates).
    """
    L = seg.elements
    repeat = total.size * 12 <= L
    if repeat and L <= 4 * _REPEAT_RUN:
        return np.repeat(total, seg.size)
    out = scratch(work, "segment_totals", L, total.dtype) if out is None else out
    if not repeat:
        return np.take(total, seg.cand_of, out=out, mode="clip")
    ends = seg.start + seg.size
    cuts = np.searchsorted(ends, np.arange(_REPEAT_RUN, L, _REPEAT_RUN), side="right")
    for lo, hi in zip([0, *cuts.tolist()], [*cuts.tolist(), total.size]):
        if hi > lo:
            out[seg.start[lo]:ends[hi - 1]] = np.repeat(total[lo:hi], seg.size[lo:hi])
    return out


#: Elements filled per ``np.repeat`` call of :func:`segment_totals` (a few hundred KiB, cache-sized)
_REPEAT_RUN = 1 << 15


def per_node(seg, parent, values):
    """A (K,) array like ``parent`` holding ``values`` (one per node with candidates, from the totals of its
    first candidate's segment) at those nodes, 0 elsewhere (``values`` itself where every node has
    candidates)."""
    if seg.node_first.size == parent.size and values.dtype == parent.dtype:  # every node (in order)
        return values
    out = np.zeros_like(parent)
    out[seg.cand_node[seg.node_first]] = values
    return out


def pick_cuts(seg, parent, base, tie, score, light, work: Workspace | None, at=None):
    """Find the first best-scoring cut of every node: returns the nodes that have one, the cuts (positions
    in ``score``) and their decreases.

    ``score`` scores every element (``at`` None; first the boundaries that are no valid cut are masked:
    ``seg.no_cut``, segment ends, the ``light`` cuts of :func:`light_cuts`), or only the valid cuts after the
    increasing elements ``at``. A cut's decrease is ``base[node] + score``; ties are judged on the decrease,
    at the scale of the larger of the best decrease and the parent's ``W i(t)``. A node's elements are
    contiguous (its candidates in order, each sorted by value), so its first cut reaching the bar is the
    first hit at or after its first element. Segments are never empty (every candidate belongs to a node
    that has items).
    """
    nodes = seg.cand_node[seg.node_first]
    node_start = seg.start[seg.node_first]
    if at is None:
        for invalid in (seg.no_cut, light):
            if invalid is not None and invalid.dtype == np.bool_:
                np.putmask(score, invalid, -np.inf)
            elif invalid is not None:
                score[invalid] = -np.inf
        score[seg.start[1:] - 1] = -np.inf
        score[-1] = -np.inf
    else:
        node_start = at.searchsorted(node_start)
    size = score.size
    if size == 0:
        return nodes[:0], node_start[:0], score[:0]
    counts = np.empty_like(node_start)  # elements of each node
    np.subtract(node_start[1:], node_start[:-1], out=counts[:-1])
    counts[-1] = size - node_start[-1]
    if counts.all():
        best = np.maximum.reduceat(score, node_start)
    else:  # (only where ``at`` skips a node: a pure one never reaches the search)
        best = np.full(counts.size, -np.inf)
        best[counts > 0] = np.maximum.reduceat(score, node_start[counts > 0])
    found = best > -np.inf
    bar = np.full(best.size, np.inf)  # (-inf arithmetic where nothing is found, but no inf - inf)
    every = nodes.size == parent.size  # (then ``nodes`` is every node in order)
    node_base, node_parent = (base, parent) if every else (base[nodes], parent[nodes])
    np.subtract(best, tie * np.maximum(np.abs(node_base + best), np.abs(node_parent)), out=bar, where=found)
    spent = seg.no_cut if seg.no_cut is not None else scratch(work, "no_cut", size, np.bool_)
    hit = _reaching(score, bar, node_start, counts, spent[:size]).nonzero()[0]
    pick = hit[hit.searchsorted(node_start[found])]
    nodes = nodes[found]
    return nodes, pick, base[nodes] + score[pick]


def _reaching(score, bar, node_start, counts, out):
    """``score >= bar`` spread over each node's elements (``counts`` from ``node_start``), into ``out``: a few
    ten thousand elements (whole nodes) at a time, so that the spread bars stay in the core's cache, and a
    node alone in its piece compared with its bar as a number (no spread at all)."""
    size, K = score.size, node_start.size
    if K == 1 or size <= _PICK_RUN:
        return np.greater_equal(score, bar[0] if K == 1 else bar.repeat(counts), out=out)
    cuts = np.unique(np.searchsorted(node_start, np.arange(_PICK_RUN, size, _PICK_RUN), side="right"))
    cuts = cuts[(cuts > 0) & (cuts < K)]
    nodes = [0, *cuts.tolist(), K]
    bounds = [0, *node_start[cuts].tolist(), size]
    for lo, hi, a, b in zip(nodes[:-1], nodes[1:], bounds[:-1], bounds[1:]):
        if hi > lo:
            np.greater_equal(score[a:b], bar[lo] if hi - lo == 1 else bar[lo:hi].repeat(counts[lo:hi]),
                             out=out[a:b])
    return out


#: Elements (whole nodes) compared with their nodes' bars at a time by :func:`_reaching`
_PICK_RUN = 1 << 15


def record_sides(seg, out, nodes, element, cand, left, right) -> None:
    """Write the children of the cut after ``element`` (of candidate ``cand``) of each of ``nodes``: their
    summed weight, class-1 count (two classes; 0 otherwise) and number of items, so the next level need not
    sum them again (exact where they are integers)."""
    items_left = element - seg.start[cand] + 1
    sides = out.sides[nodes]
    sides[:, 0, 0], sides[:, 0, 1], sides[:, 0, 2] = left[0], left[1], items_left
    sides[:, 1, 0], sides[:, 1, 1], sides[:, 1, 2] = right[0], right[1], seg.size[cand] - items_left
    out.sides[nodes] = sides


def record_cuts(seg, out, nodes, element, decrease, heavier_left, cand=None):
    """Write the cut after sorted ``element`` (of candidate ``cand``, found if not given) of each of ``nodes``
    into ``out``: its feature, the midpoint of the neighbouring distinct values as threshold (the lower value
    where the midpoint rounds onto the upper one) and the dense rank of the lower value, the decrease, and
    missing values sent to the heavier child."""
    feature = seg.cand_feat[seg.candidate(element) if cand is None else cand]
    row = seg.rows_of(element)
    if seg.x is None:  # the fast paths: read the two values of each cut from X
        lo, hi = seg.data.X[row, feature], seg.data.X[seg.rows_of(element + 1), feature]
    else:
        lo, hi = seg.x[element], seg.x[element + 1]
    threshold = 0.5 * lo + 0.5 * hi
    out.found[nodes] = True
    out.feature[nodes] = feature
    out.cut_rank[nodes] = seg.data.dense[feature, row]
    out.threshold[nodes] = np.where((threshold < hi) & (threshold >= lo), threshold, lo)
    out.decrease[nodes] = decrease
    out.missing_left[nodes] = heavier_left
    return out
