"""Each element's weight of its own class before it within its segment, for the many-class searches.

The elements of a level are sorted by candidate, then value. For element ``e`` of class ``k`` in segment
``c``, ``before[e]`` is the summed weight of the class-``k`` elements of ``c`` that precede it. With the
class's total weight in the node, ``C_k``, it is what makes Gini's sum of squared class weights and
entropy's sum of ``c log c`` O(1) work an element whatever the number of classes: moving ``e`` from the right
side of a cut to the left changes only its own class's weights, from ``before[e]`` to ``before[e] + w[e]`` on
the left and from ``C_k - before[e]`` to ``C_k - before[e] - w[e]`` on the right (see :mod:`.many_class`).

One sort of ``class << bits | e`` (32-bit keys while they fit) groups the elements by class, in level order
within each class, so the elements of one (candidate, class) pair are contiguous and in value order; one
integer ``cumsum`` over that order, less its value at each group's start (spread over the group by a
running maximum, the sums never decreasing), gives ``before``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .key_sort import stable_order
from .workspace import Workspace, scratch

__all__ = ["cell_weight_through", "class_ranks", "class_weight_through"]


def class_ranks(w: NDArray, y: NDArray, cand: NDArray, classes: int, work: Workspace | None = None,
                total: int | None = None) -> NDArray:
    """Per element, the weight of the elements of its class and candidate that precede it.

    ``w``: integer weights, ``y``: classes ``0..classes-1``, ``cand``: the candidate of each element
    (non-decreasing); ``total``: a bound on the sum of ``w`` (default: every weight below 256). Sums are int32
    where that fits, else int64; the result is a scratch buffer of ``work``.
    """
    L = w.size
    dtype = np.int32 if (L * 255 if total is None else total) < (1 << 31) else np.int64
    order, first = _class_groups(y, cand, classes, work)
    wp = np.take(w, order, out=scratch(work, "cr_wp", L, dtype), mode="clip")
    cs = np.cumsum(wp, out=scratch(work, "cr_cs", L, dtype))
    before_p = np.subtract(cs, wp, out=wp)  # the sum before each element
    spread = np.multiply(before_p, first, out=cs)  # ... at each group's first element, 0 elsewhere
    np.maximum.accumulate(spread, out=spread)  # (the sums never decrease)
    before_p -= spread
    before = scratch(work, "cr_before", L, dtype)
    before[order] = before_p
    return before


def _class_groups(y, cand, classes: int, work: Workspace | None):
    """The elements in (class, level position) order (a stable sort of the classes), and where each (class,
    candidate) group starts."""
    L = y.size
    order = stable_order(y, max(1, (classes - 1).bit_length()))
    ordered = np.take(cand, order, out=scratch(work, "cr_cand", L, cand.dtype), mode="clip")
    first = scratch(work, "cr_first", L, np.bool_)
    first[0] = True
    np.not_equal(ordered[1:], ordered[:-1], out=first[1:])
    # where the class changes
    starts = np.cumsum(np.bincount(y, minlength=classes)[:-1])
    first[starts[starts < L]] = True
    return order, first


def class_weight_through(w: NDArray, y: NDArray, cell: NDArray, place: NDArray, class_total: NDArray,
                         node_class: NDArray, ncand: NDArray, classes: int, work: Workspace | None = None) -> NDArray:
    """:func:`class_ranks` plus ``w`` for the runs of one class of a level (or its elements), from the node
    sums: per run, the weight of its class in its segment up to and including it.

    ``w``: integer weights; ``y``: classes (below ``2**16``); ``cell``: ``y * nodes + node``, the run's
    (class, node); ``place``: its candidate's position among its node's candidates; ``class_total``:
    ``node_class[cell]``; ``node_class``: the weight of every (class, node) of the level, class-major (int64);
    ``ncand``: candidates per node. Runs are in level order (node, candidate, value).

    One stable sort of the classes (a radix sort of ``uint8`` or ``uint16``) puts the runs in (class, node,
    candidate, value) order; there the ``cumsum`` of ``w`` at a run is the weight of every (class, node,
    candidate) group before its own, ``base``, plus the weight of its class up to it in its segment. Every
    segment of a node holds all of the node's items, so ``base`` is known without reading the runs: the
    exclusive cumulative sum, in (class, node) order, of ``ncand * node_class``, plus ``place`` times the
    class's weight in the node. No group starts are searched or spread.
    """
    R = w.size
    nodes = ncand.size
    grid = np.multiply(node_class.reshape(-1, nodes), ncand, out=scratch(work, "cr_grid", node_class.size,
                                                                         np.int64).reshape(-1, nodes)).ravel()
    base = np.cumsum(grid, out=scratch(work, "cr_base", grid.size, np.int64))
    base -= grid  # (exclusive)
    dtype = np.int32 if base[-1] + grid[-1] < (1 << 31) else np.int64
    order = np.argsort(y.astype(np.uint8 if classes <= 256 else np.uint16, copy=False), kind="stable")
    wp = np.take(w, order, out=scratch(work, "cr_wp", R, dtype), mode="clip")
    np.cumsum(wp, out=wp)
    through = scratch(work, "cr_before", R, dtype)
    through[order] = wp
    through -= np.take(base, cell, mode="clip")
    through -= place * class_total
    return through


def cell_weight_through(w: NDArray, y: NDArray, cell: NDArray, cell_weight: NDArray, classes: int,
                        work: Workspace | None = None) -> NDArray:
    """:func:`class_weight_through` from a table of (class, candidate) cells: per run, the weight of its class
    in its segment up to and including it.

    ``cell``: ``y * C + candidate`` (``C`` candidates, class-major); ``cell_weight``: (classes * C,) int64, the
    weight of each cell's class in its candidate's node (every segment of a node holds all of its items).
    Runs are in level order (candidate, value). After the stable sort of the classes the runs are in
    (class, candidate, value) order, where the ``cumsum`` of ``w`` at a run is its own class's weight up to
    it in its segment plus the exclusive cumulative sum of ``cell_weight`` at its cell.
    """
    R = w.size
    base = np.cumsum(cell_weight, out=scratch(work, "cr_base", cell_weight.size, np.int64))
    dtype = np.int32 if base[-1] < (1 << 31) else np.int64
    base -= cell_weight  # (exclusive)
    order = np.argsort(y.astype(np.uint8 if classes <= 256 else np.uint16, copy=False), kind="stable")
    wp = np.take(w, order, out=scratch(work, "cr_wp", R, dtype), mode="clip")
    np.cumsum(wp, dtype=dtype, out=wp)
    through = scratch(work, "cr_before", R, dtype)
    through[order] = wp
    through -= np.take(base.astype(dtype), cell, mode="clip")
    return through
