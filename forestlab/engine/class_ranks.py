"""Each element's weight of its own class before and after it within its segment, for many-class searches.

The elements of a level are sorted by candidate, then value. For element ``e`` of class ``k`` in segment
``c``, ``before[e]`` is the summed weight of the class-``k`` elements of ``c`` that precede it, ``after[e]``
that of those that follow it. They are what makes Gini's sum of squared class weights and entropy's sum of
``c log c`` O(1) work an element whatever the number of classes: moving ``e`` from the right side of a cut to
the left changes only its own class's weight, from ``before[e]`` to ``before[e] + w[e]`` on the left and
from ``after[e] + w[e]`` to ``after[e]`` on the right (see :mod:`.many_class`).

One sort of ``class << bits | e`` (32-bit keys while they fit) groups the elements by class, in level order
within each class, so the elements of one (candidate, class) pair are contiguous and in value order; one
integer ``cumsum`` over that order, less its value at each group's start (a running maximum spreads it) or
taken from each group's end (a running minimum from the right), gives both.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .workspace import Workspace, scratch

__all__ = ["class_ranks"]


def class_ranks(w: NDArray[np.int64], y: NDArray, cand: NDArray, classes: int,
                work: Workspace | None = None) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """``(before, after)``: per element, the weight of the other elements of its class and candidate that
    precede and follow it (``w``: integer weights, ``y``: classes ``0..classes-1``, ``cand``: the candidate
    of each element, non-decreasing). Both are scratch buffers of ``work``."""
    L = w.size
    order, first = _class_groups(y, cand, classes, work)
    wp = np.take(w, order, out=scratch(work, "cr_wp", L, np.int64), mode="clip")
    cs = np.cumsum(wp, out=scratch(work, "cr_cs", L, np.int64))
    # before: the sum up to the element less the sum up to its group's first element
    spread = scratch(work, "cr_spread", L, np.int64)
    spread.fill(0)
    np.subtract(cs, wp, out=spread, where=first)
    np.maximum.accumulate(spread, out=spread)  # (the sums never decrease)
    before_p = np.subtract(cs, wp, out=wp)
    before_p -= spread
    # after: the sum up to its group's last element less the sum up to the element
    last = np.roll(first, -1)
    spread.fill(np.iinfo(np.int64).max)
    np.copyto(spread, cs, where=last)
    tail = spread[::-1]
    np.minimum.accumulate(tail, out=tail)
    after_p = np.subtract(spread, cs, out=cs)
    before = scratch(work, "cr_before", L, np.int64)
    before[order] = before_p
    after = scratch(work, "cr_after", L, np.int64)
    after[order] = after_p
    return before, after


def _class_groups(y, cand, classes: int, work: Workspace | None):
    """The elements in (class, level position) order, and where each (class, candidate) group starts."""
    L = y.size
    bits = max(1, (L - 1).bit_length())
    dtype = np.uint32 if bits + max(1, (classes - 1).bit_length()) <= 32 else np.uint64
    key = scratch(work, "cr_key", L, dtype)
    np.left_shift(y, bits, out=key, dtype=dtype, casting="unsafe")
    key |= np.arange(L, dtype=dtype)
    key.sort()
    order = np.bitwise_and(key, (1 << bits) - 1, out=scratch(work, "cr_order", L, np.int64), dtype=np.int64,
                           casting="unsafe")
    group = scratch(work, "cr_group", L, np.int64)
    np.take(cand, order, out=group, mode="clip")
    group += np.right_shift(key, bits).astype(np.int64) << 40  # class above candidate (fewer than 2**40)
    first = scratch(work, "cr_first", L, np.bool_)
    first[0] = True
    np.not_equal(group[1:], group[:-1], out=first[1:])
    return order, first
