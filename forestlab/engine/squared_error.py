"""The squared-error fast search (no missing values or categories): every element's score from the running
sums of the case weight ``W`` and of the weighted target ``S``, centred on each node's mean, packed as ``W +
1j * S`` (see :mod:`.fast_search`, which gathers them).

The scores are formed a piece of whole segments at a time, so that each piece's segment weights, right-side
weights and the products ``W_l * W_r`` stay in the core's cache; the arithmetic of every element is the same
as over the whole level, so the scores are the same bit for bit.
"""

from __future__ import annotations

import numpy as np

from .cuts import light_reach, per_node, pick_cuts, record_cuts, record_sides
from .running import running_sums
from .elements import Items
from .workspace import Workspace, scratch

__all__ = ["item_moments", "squared_error_best_splits", "summed_moments", "summed_weights"]


def item_moments(column, counts, stats, items):
    """Each item's weighted target and its square, ``S1 + 1j * S2``, as the batch's second column would
    hold them: ``S1`` from the first column ``W + 1j * S1`` and ``S2 = count * stats[row, 2]``, the product
    that column is made of (the same values bit for bit); ``stats`` C-contiguous."""
    values = np.take(column, items.wi, mode="clip")
    values.real = values.imag
    count = np.take(counts.ravel(), items.wi, mode="clip")
    values.imag = count * np.take(stats.ravel(), items.row * stats.shape[1] + 2, mode="clip")
    return values


def summed_moments(column, counts, stats, items, K: int):
    """Every node's ``S1 + 1j * S2`` summed over its items (``np.add.at`` into zeros, as the node sums add
    them), the items' pairs formed by :func:`item_moments` ``_MOMENT_BLOCK`` items at a time: each node's
    values are added in item order from 0 as by one ``np.add.at`` over all items, so the same sums bit for
    bit, and a block's temporaries (a few MB) replace the level's (about 40 bytes an item: 25 MB at the root
    of a million-row tree, the fit's peak)."""
    out = np.zeros(K, dtype=column.dtype)
    for lo in range(0, items.row.size, _MOMENT_BLOCK):
        part = Items(*(a[lo:lo + _MOMENT_BLOCK] for a in (items.row, items.node, items.wi)))
        np.add.at(out, part.node, item_moments(column, counts, stats, part))
    return out


def summed_weights(column, items, K: int):
    """Every node's weight from the real part of the first column ``W + 1j * S1`` (whole counts, no case
    weights: exact in any order), summed ``_MOMENT_BLOCK`` items at a time (a block's temporaries, not the
    level's)."""
    out = np.zeros(K)
    for lo in range(0, items.row.size, _MOMENT_BLOCK):
        weight = np.take(column, items.wi[lo:lo + _MOMENT_BLOCK], mode="clip").real  # (not strided)
        out += np.bincount(items.node[lo:lo + _MOMENT_BLOCK], weights=weight, minlength=K)
    return out


def squared_error_best_splits(seg, min_leaf: float, lightest: float, elem, parent, out, tie: float,
                              work: Workspace | None, whole_weights: bool = False, carry=None):
    """As :func:`.fast_search.binary_best_splits` for the squared-error splitter, from the case weight ``W``
    and the weighted target ``S``, centred on the mean of the element's node, of the elements, packed as
    ``W + 1j * S`` (``elem``, overwritten).

    The decrease of the within-node sum of squares of a cut is ``S_l**2 / W_l + S_r**2 / W_r - S**2 / W``
    (Breiman et al. 1984, section 8.3) for any centring of the target; centred on the node's mean, ``S`` is
    0, so ``S_r = -S_l`` and the decrease is ``W * S_l**2 / (W_l * W_r)``: no right sums, no difference of
    large terms (so it is also more accurate where the decrease is small beside ``S**2 / W``). The centred
    values of a node sum to their rounding residue rather than to 0 exactly (about ``1e-16`` of the summed
    ``|S|``), which enters the score at that size. Equal to the squared-error splitter's score up to
    rounding. Only the running sums of ``W`` (integers without case weights: exact) and ``S`` are needed.
    ``whole_weights``: every weight is a whole number (bootstrap counts, no case weights), which lets
    :func:`_squared_error_scores` find the light cuts from the product ``W_l * W_r`` it forms anyway.
    ``carry``: see :func:`.running_sums` (a level searched in blocks of candidates).
    """
    left, total = running_sums(elem, seg.start, seg.cand_tree, out=elem, carry=carry)
    left_w = left.real
    score, light = _squared_error_scores(seg, left, np.ascontiguousarray(total.real), min_leaf, lightest, work,
                                         whole_weights)
    weight = total.real[seg.node_first]  # the decrease is W * score: picked on score, at the node's scale
    scale = per_node(seg, parent, 1.0 / weight)
    nodes, pick, decrease = pick_cuts(seg, parent * scale, np.zeros_like(parent), tie, score, light, work)
    decrease /= scale[nodes]
    none = np.zeros(pick.size)
    cand = seg.candidate(pick)
    lw = left_w[pick]
    rw = total.real[cand] - lw
    record_sides(seg, out, nodes, pick, cand, (lw, none), (rw, none))
    return record_cuts(seg, out, nodes, pick, decrease, lw >= rw, cand)


def _squared_error_scores(seg, left, weight, min_leaf: float, lightest: float, work: Workspace | None,
                          whole_weights: bool = False):
    """Every element's ``S_l**2 / (W_l * W_r)`` (a scratch array) and the cuts that leave a side lighter
    than ``min_leaf`` (as :func:`.light_cuts`; None when they are already ``-inf`` in the scores), from the
    running sums ``left`` (``W_l + 1j * S_l``) and the segments' weights ``weight`` (contiguous).

    Formed a few ten thousand elements (whole segments) at a time: each piece's segment weights, then ``W_r``
    and ``W_l * W_r`` in place, stay in the core's cache, so of the level-sized arrays only the scores are
    written (not the weights spread over the level, nor ``W_r``, nor the product). With whole weights and
    short segments the light cuts are written as ``-inf`` in the same pieces (:func:`_light_bars`).
    """
    L, C = left.size, seg.start.size
    left_w, left_s = left.real, left.imag
    score = np.empty(L)  # (fresh, as the elements' sums: see FastPath.best_splits)
    reach = None if min_leaf <= lightest else light_reach(seg, L, min_leaf, lightest)
    bars = None
    if whole_weights and reach is not None and _GATE_LEVEL <= L < C * _ENDS_RUN:  # light cuts from the products
        bars, reach = _light_bars(weight, min_leaf), None
    light = scratch(work, "light", L, np.bool_) if reach == 0 else None
    by_gather = C * _GATHER_RUN > L  # short segments: a gather by candidate, else each weight repeated
    ends = seg.start + seg.size
    cuts = [] if L <= _SCORE_RUN else np.searchsorted(ends, np.arange(_SCORE_RUN, L, _SCORE_RUN), side="right").tolist()
    with np.errstate(divide="ignore", invalid="ignore"):  # (segment ends: masked by the pick)
        for lo, hi in zip([0, *cuts], [*cuts, C]):
            if hi <= lo:
                continue
            a, b = int(seg.start[lo]), int(ends[hi - 1])
            lw = left_w[a:b]
            spread = np.take(weight, seg.cand_of[a:b], mode="clip") if by_gather else \
                np.repeat(weight[lo:hi], seg.size[lo:hi])
            spread -= lw  # W_r
            if light is not None:
                np.less(np.minimum(lw, spread), min_leaf, out=light[a:b])
            spread *= lw  # W_l * W_r
            np.divide(np.square(left_s[a:b], out=score[a:b]), spread, out=score[a:b])
            if bars is not None:  # -inf where W_l * W_r falls below the segment's bar (a light cut)
                bar = np.take(bars, seg.cand_of[a:b], mode="clip") if by_gather else \
                    np.repeat(bars[lo:hi], seg.size[lo:hi])
                np.subtract(spread, bar, out=bar)
                bar *= np.inf
                np.minimum(score[a:b], bar, out=score[a:b])
    if reach:  # long segments: only the elements near their ends can leave a side too light
        light = _light_near_ends(seg, left_w, weight, min_leaf, reach)
    return score, light


def _light_near_ends(seg, left_w, weight, min_leaf: float, reach: int):
    """The elements among the first ``reach`` and the last ``reach + 1`` of every segment (those of
    :func:`.segment_ends`) whose cut leaves a side lighter than ``min_leaf`` (possibly repeated where a
    segment is short), from the running weights ``left_w`` and the segments' weights ``weight``.

    Every item weighs at least ``min_leaf / reach``, so the ``j``-th element of a segment has ``W_l >= (j + 1)
    min_leaf / reach`` and the ``j``-th from its end ``W_r >= j min_leaf / reach``: no other element is light.
    Formed as (segments, ``2 reach + 1``) arrays, each element's segment known from its row (no search for
    it, no compaction of the overlaps).
    """
    first, last = seg.start[:, None], (seg.start + seg.size - 1)[:, None]
    steps = np.arange(reach + 1)
    near = np.concatenate([np.minimum(first + steps[:-1], last), np.maximum(last - steps, first)], axis=1)
    lw = left_w[near]
    return near[np.minimum(lw, weight[:, None] - lw) < min_leaf]


def _light_bars(weight, min_leaf: float):
    """Per segment of weight ``W`` (whole numbers), the bar below which ``W_l * W_r`` marks a light cut.

    With whole weights, ``W_l < min_leaf`` is ``W_l < m``, ``m = ceil(min_leaf)``, and ``W_l * W_r - m (W -
    m) = (W_l - m) (W_r - m)`` (as ``W_r = W - W_l``), which is negative exactly when one side is lighter than
    ``m`` (both cannot be, where ``W >= 2 m``; below that every cut is light: bar ``inf``). The products and
    ``m (W - m)`` are whole numbers, exact as floats below ``2**53``, so the bar ``m (W - m) - 1/2`` is never
    met: ``(W_l W_r - bar) * inf`` is ``+inf`` or ``-inf``, and its minimum with the score keeps valid scores
    and writes ``-inf`` at light cuts (the segment ends included).
    """
    m = float(np.ceil(min_leaf))
    return np.where(weight >= 2.0 * m, m * (weight - m) - 0.5, np.inf)


#: Items whose target and square :func:`summed_moments` forms, or whose weights :func:`summed_weights`
#: sums, at a time (2 MiB of temporaries)
_MOMENT_BLOCK = 1 << 16
#: Elements (whole segments) scored at a time by :func:`_squared_error_scores` (a few hundred KiB a piece)
_SCORE_RUN = 1 << 15
#: With whole weights, levels whose segments average fewer elements than this find their light cuts from
#: the products in every piece (a few operations an element); longer ones at the segment ends only
_ENDS_RUN = 128
#: ... on levels of at least this many elements (on smaller ones the few more calls cost more than they save)
_GATE_LEVEL = 4096
#: Segments averaging fewer elements than this get their weights by a gather by candidate, not a repeat
_GATHER_RUN = 12

