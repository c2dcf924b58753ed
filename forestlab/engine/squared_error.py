"""The squared-error fast search (no missing values or categories): every element's score from the running
sums of the case weight ``W`` and of the weighted target ``S``, centred on each node's mean, packed as ``W +
1j * S`` (see :mod:`.fast_search`, which gathers them).

The scores are formed a piece of whole segments at a time, so that each piece's segment weights, right-side
weights and the products ``W_l * W_r`` stay in the core's cache; the arithmetic of every element is the same
as over the whole level, so the scores are the same bit for bit.
"""

from __future__ import annotations

import numpy as np

from .cuts import light_reach, per_node, pick_cuts, record_cuts, record_sides, segment_ends
from .running import running_sums
from .workspace import Workspace, scratch

__all__ = ["squared_error_best_splits"]


def squared_error_best_splits(seg, min_leaf: float, lightest: float, elem, parent, out, tie: float,
                              work: Workspace | None, carry=None):
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
    ``carry``: see :func:`.running_sums` (a level searched in blocks of candidates).
    """
    left, total = running_sums(elem, seg.start, seg.cand_tree, out=elem, carry=carry)
    left_w = left.real
    score, light = _squared_error_scores(seg, left, total.real, min_leaf, lightest, work)
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


def _squared_error_scores(seg, left, weight, min_leaf: float, lightest: float, work: Workspace | None):
    """Every element's ``S_l**2 / (W_l * W_r)`` (a scratch array) and the cuts that leave a side lighter
    than ``min_leaf`` (as :func:`.light_cuts`), from the running sums ``left`` (``W_l + 1j * S_l``) and the
    segments' weights ``weight``.

    Formed a few ten thousand elements (whole segments) at a time: each piece's segment weights, then ``W_r``
    and ``W_l * W_r`` in place, stay in the core's cache, so of the level-sized arrays only the scores are
    written (not the weights spread over the level, nor ``W_r``, nor the product).
    """
    L, C = left.size, seg.start.size
    left_w, left_s = left.real, left.imag
    score = scratch(work, "score", L, np.float64)
    reach = None if min_leaf <= lightest else light_reach(seg, L, min_leaf, lightest)
    light = scratch(work, "light", L, np.bool_) if reach == 0 else None
    by_gather = C * 12 > L  # short segments: a gather by candidate, else each weight repeated over its segment
    ends = seg.start + seg.size
    cuts = np.searchsorted(ends, np.arange(_SCORE_RUN, L, _SCORE_RUN), side="right").tolist()
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
    if reach:  # long segments: only the elements near their ends can leave a side too light
        near = segment_ends(seg, reach)
        lw = left_w[near]
        light = near[np.minimum(lw, np.take(weight, seg.candidate(near), mode="clip") - lw) < min_leaf]
    return score, light


#: Elements (whole segments) scored at a time by :func:`_squared_error_scores` (a few hundred KiB a piece)
_SCORE_RUN = 1 << 15

