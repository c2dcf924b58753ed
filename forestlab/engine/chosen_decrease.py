"""The impurity decrease of each chosen cut of the many-class searches, formed as the generic search forms it.

A stored decrease must not depend on the search that found the split: it is ``W_t i(t) - W_l i(l) - W_r i(r)``
from the sides' class weights through the splitter's own ``impurity``. The class weights of a side are
integer counts, summed exactly in any order, so they may be counted over the elements of the chosen segments
(:func:`splitter_decrease`) or over their runs of one class (:func:`run_decrease`), and over the smaller
side only, the other being the node's weights less those.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .splitter import CartSplitter, call_splitter

__all__ = ["run_decrease", "splitter_decrease"]


def splitter_decrease(splitter: CartSplitter, seg, cand, cut, w, y, classes: int, parent, node_class=None,
                      sides=None) -> NDArray[np.float64]:
    """The decrease of each chosen cut (after element ``cut`` of candidate ``cand``) as the generic search
    forms it, ``W_t i(t) - W_l i(l) - W_r i(r)`` from the sides' class weights with the splitter's own
    ``impurity``, so a stored decrease does not depend on the search that found the split. One pass over the
    chosen segments: as many elements as the nodes have items; given the nodes' class weights
    ``node_class`` (chosen nodes x classes) and the sides' weights ``sides`` (integers), over the smaller side
    of each cut only, the other side being the node's weights less those (exact: integer counts, whose sums
    do not depend on their order)."""
    size = seg.size[cand]
    if node_class is None:
        first, count = seg.start[cand], size
    else:
        left = cut - seg.start[cand] + 1
        small_left = 2 * left <= size
        first, count = np.where(small_left, seg.start[cand], cut + 1), np.where(small_left, left, size - left)
    owner = np.repeat(np.arange(cand.size), count)
    element = np.arange(owner.size) + np.repeat(first - (np.cumsum(count) - count), count)
    if node_class is None:
        owner = owner * 2 + (element > np.repeat(cut, count))
    cell = owner * classes + np.take(y, element, mode="clip")
    by_class = np.bincount(cell, weights=np.take(w, element, mode="clip"),
                           minlength=cand.size * (2 if node_class is None else 1) * classes)
    if node_class is not None:
        return _decrease(splitter, by_class.reshape(cand.size, classes), node_class, small_left, sides, parent)
    S = np.empty((cand.size, 2, 1 + classes))
    S[..., 1:] = by_class.reshape(cand.size, 2, classes)
    S[..., 0] = S[..., 1:].sum(axis=-1)
    impurity = call_splitter(splitter, "impurity", S)
    return parent - S[:, 0, 0] * impurity[:, 0] - S[:, 1, 0] * impurity[:, 1]


def run_decrease(splitter: CartSplitter, first, runs, cand, cut, run_w, run_y, classes: int, parent, node_class,
                 sides) -> NDArray[np.float64]:
    """:func:`splitter_decrease` of the cuts after run ``cut`` of candidate ``cand`` (runs of one class in a
    segment: ``first`` and ``runs`` per candidate, ``run_w`` and ``run_y`` per run), counting the class
    weights of the side with fewer runs over its runs: the same integers, so the same decreases."""
    left = cut - first[cand] + 1
    size = runs[cand]
    small_left = 2 * left <= size
    start, count = np.where(small_left, first[cand], cut + 1), np.where(small_left, left, size - left)
    owner = np.repeat(np.arange(cand.size), count)
    run = np.arange(owner.size) + np.repeat(start - (np.cumsum(count) - count), count)
    cell = owner * classes + np.take(run_y, run, mode="clip")
    by_class = np.bincount(cell, weights=np.take(run_w, run, mode="clip"), minlength=cand.size * classes)
    return _decrease(splitter, by_class.reshape(cand.size, classes), node_class, small_left, sides, parent)


def _decrease(splitter: CartSplitter, counted, node_class, small_left, sides, parent) -> NDArray[np.float64]:
    """``parent - W_l i(l) - W_r i(r)`` from the class weights ``counted`` of one side of each cut (the left
    one where ``small_left``), the nodes' ``node_class`` and the sides' weights ``sides``."""
    S = np.empty((counted.shape[0], 2, 1 + counted.shape[1]))
    S[:, 0, 1:] = counted
    np.subtract(node_class, counted, out=S[:, 1, 1:])
    swap = np.flatnonzero(~small_left)  # there the right side was counted
    S[swap, :, 1:] = S[swap, ::-1, 1:]
    S[:, 0, 0], S[:, 1, 0] = sides
    impurity = call_splitter(splitter, "impurity", S)
    return parent - S[:, 0, 0] * impurity[:, 0] - S[:, 1, 0] * impurity[:, 1]
