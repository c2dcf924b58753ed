"""Running sums restarted at every segment of a level's sorted elements."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["Carry", "running_sums"]


class Carry:
    """Where the floating-point running sums of a level searched in blocks of candidates stand after the
    blocks searched so far (:mod:`.level_blocks`): the batch slot of the last segment, the running sum at its
    last element and its total. Passed to :func:`running_sums` for each block in order, it makes every
    block's sums those of the whole level bit for bit (the same operands in the same order)."""

    def __init__(self) -> None:
        self.tree: int | None = None
        self.value: NDArray | None = None
        self.total: NDArray | None = None

    def copy(self) -> Carry:
        other = Carry()
        other.tree, other.value, other.total = self.tree, self.value, self.total
        return other


def running_sums(values: NDArray, start: NDArray[np.int64], cand_tree: NDArray[np.int64],
                 out: NDArray | None = None, carry: Carry | None = None) -> tuple[NDArray, NDArray]:
    """Running sums along the last axis, restarted at every segment ``start``, and every segment's total.

    Each segment start gets the previous segment's total subtracted, so a single ``cumsum`` restarts at
    every segment. Integer sums are exact, so one ``cumsum`` serves the whole level. Floating-point (and
    complex) sums restart near zero (rounding stays at the scale of one segment) and run one ``cumsum`` per
    tree, so a tree's arithmetic does not depend on the other trees of its batch. Segments must not be
    empty; ``values`` (..., L) is modified in place; ``out``, if given, receives the running sums. ``carry``
    (floating-point sums of one block of a level's candidates) continues the sums of the blocks before it
    where its first segment is of the same tree as their last, and is updated.
    """
    totals = np.add.reduceat(values, start, axis=-1)
    out = np.empty_like(values) if out is None else out
    floating = values.dtype.kind not in "iu"
    if floating and carry is not None and carry.tree is not None and carry.tree == cand_tree[0]:
        # as if the last segment before this block preceded it: its total subtracted, then its running sum
        # added, each rounded as the whole level's cumsum rounds them
        first = np.subtract(values[..., 0], carry.total)
        values[..., 0] = np.add(carry.value, first)
    if not floating or cand_tree[0] == cand_tree[-1]:  # exact, or one tree: one cumsum
        values[..., start[1:]] -= totals[..., :-1]
        np.cumsum(values, axis=-1, out=out)
    else:
        tree_first = np.ones(start.size, dtype=bool)
        tree_first[1:] = cand_tree[1:] != cand_tree[:-1]
        restart = np.flatnonzero(~tree_first)
        values[..., start[restart]] -= totals[..., restart - 1]
        bounds = np.append(start[tree_first], values.shape[-1])
        for lo, hi in zip(bounds[:-1], bounds[1:]):
            np.cumsum(values[..., lo:hi], axis=-1, out=out[..., lo:hi])
    if floating and carry is not None:
        carry.tree = int(cand_tree[-1])
        carry.value, carry.total = out[..., -1].copy(), totals[..., -1].copy()
    return out, totals
