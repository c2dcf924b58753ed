"""Running sums restarted at every segment of a level's sorted elements."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["running_sums"]


def running_sums(values: NDArray, start: NDArray[np.int64], cand_tree: NDArray[np.int64],
                 out: NDArray | None = None) -> tuple[NDArray, NDArray]:
    """Running sums along the last axis, restarted at every segment ``start``, and every segment's total.

    Each segment start gets the previous segment's total subtracted, so a single ``cumsum`` restarts at
    every segment. Integer sums are exact, so one ``cumsum`` serves the whole level. Floating-point (and
    complex) sums restart near zero (rounding stays at the scale of one segment) and run one ``cumsum`` per
    tree, so a tree's arithmetic does not depend on the other trees of its batch. Segments must not be
    empty; ``values`` (..., L) is modified in place; ``out``, if given, receives the running sums.
    """
    totals = np.add.reduceat(values, start, axis=-1)
    out = np.empty_like(values) if out is None else out
    if values.dtype.kind in "iu" or cand_tree[0] == cand_tree[-1]:  # exact, or one tree: one cumsum
        values[..., start[1:]] -= totals[..., :-1]
        return np.cumsum(values, axis=-1, out=out), totals
    tree_first = np.ones(start.size, dtype=bool)
    tree_first[1:] = cand_tree[1:] != cand_tree[:-1]
    restart = np.flatnonzero(~tree_first)
    values[..., start[restart]] -= totals[..., restart - 1]
    bounds = np.append(start[tree_first], values.shape[-1])
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        np.cumsum(values[..., lo:hi], axis=-1, out=out[..., lo:hi])
    return out, totals
