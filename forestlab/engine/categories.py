"""Categorical predictors in the engine: the per-node category order and left-category sets.

Columns arrive as codes ``0..k-1`` (NaN missing): :mod:`forestlab.intake.categories` codes them.

A categorical feature splits on a *subset* of its categories. Within each node the categories present are
ordered by the class-1 share (two classes) or the mean response (regression), and the split points of that
order are searched like those of a numeric feature; for these two cases the best of the ``2**(k-1) - 1``
subsets is always among them (Breiman, Friedman, Olshen & Stone 1984, *Classification and Regression Trees*,
section 9.4; Fisher 1958, "On grouping for maximum homogeneity"). That holds when ``min_leaf`` excludes no
subset: where it does, the best allowed split point of the order is taken, and the best allowed subset need
not be one of them (a rare category may be worth pairing with a far one). With more than two classes the
categories are ordered by their projection on the first principal component of the (weight-weighted)
class-share matrix, the heuristic of Coppersmith, Hong & Hosking (1999), "Partitioning nominal attributes in decision
trees", Data Mining and Knowledge Discovery 3, 197-217; it is not always optimal.

A category that a node never saw in training (absent from its cases, or unseen in the whole training set)
goes where the node sends missing values.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .principal_axis import LEADING, projections

__all__ = ["category_order", "in_left_set", "left_sets", "principal_scores", "two_category_first", "words_for"]


def words_for(categories: int) -> int:
    """uint64 words needed for a bit set over ``categories`` categories."""
    return -(-int(categories) // 64)


def category_order(weight: NDArray[np.float64], response: NDArray[np.float64],
                   by_class: NDArray[np.float64] | None) -> NDArray[np.int64]:
    """Position of every category in each candidate's order, shape (candidates, k).

    ``weight`` (candidates, k) is the case weight per category; ``response`` the class-1 weight (two classes)
    or the weighted target sum (regression); ``by_class`` (candidates, k, K) the weight per class when
    K > 2, else None. Absent categories go last; ties keep the code order.
    """
    present = weight > 0
    with np.errstate(invalid="ignore", divide="ignore"):
        if by_class is None:
            score = response / weight
        else:
            score = _first_component_scores(weight, by_class)
    score = np.where(present, score, np.inf)
    order = np.argsort(score, axis=1, kind="stable")
    pos = np.empty_like(order)
    np.put_along_axis(pos, order, np.arange(order.shape[1])[None, :], axis=1)
    return pos


def _first_component_scores(weight, by_class):
    """Projection of each category's class shares on the first weighted principal component (up to a
    positive factor; :func:`.principal_axis.projections`), :data:`BLOCK` candidates at a time so that the
    (candidates, k, K) temporaries stay in a core's cache."""
    scores = np.empty(weight.shape)
    for lo in range(0, weight.shape[0], BLOCK):
        w, counts = weight[lo:lo + BLOCK], by_class[lo:lo + BLOCK]
        shares = counts / np.where(w > 0, w, 1.0)[..., None]
        present = counts.any(axis=1)  # (candidates, K): the classes in the node
        two = np.flatnonzero(np.count_nonzero(present, axis=1) <= 2)
        # at most two classes: the axis is that of the first one's share (up to rounding and a factor)
        scores[lo + two] = np.take_along_axis(shares[two], np.argmax(present[two], axis=1)[:, None, None],
                                              axis=2)[..., 0]
        more = np.flatnonzero(np.count_nonzero(present, axis=1) > 2)
        scores[lo + more] = _projected(w[more], shares[more])
    return scores


def principal_scores(weight: NDArray[np.float64], by_class: NDArray[np.float64]) -> NDArray[np.float64]:
    """The many-class order's scores (C, k) of candidates whose nodes hold more than two classes: each
    category's class shares projected on the first weighted principal component, :data:`BLOCK` candidates
    at a time (the same operations on the same operands as :func:`category_order`, whatever the other
    candidates)."""
    scores = np.empty(weight.shape)
    for lo in range(0, weight.shape[0], BLOCK):
        w, counts = weight[lo:lo + BLOCK], by_class[lo:lo + BLOCK]
        scores[lo:lo + BLOCK] = _projected(w, counts / np.where(w > 0, w, 1.0)[..., None])
    return scores


def _projected(w, shares):
    """Projections of the categories' ``shares`` (C, k, K) of weights ``w`` (C, k) on their first weighted
    principal component (:func:`.principal_axis.projections`), centred on the weighted mean shares."""
    total = w.sum(axis=1, keepdims=True)
    total[total == 0] = 1.0  # a candidate whose node cases all miss this feature: no category to order
    mean = np.einsum("ck,ckj->cj", w, shares) / total
    return projections(w, shares - mean[:, None, :])


def two_category_first(shares: NDArray[np.float64]) -> NDArray[np.bool_]:
    """Whether the lower-coded of exactly two present categories comes first in the many-class order, from
    their class shares ``shares`` (C, 2, K), without the power iterations.

    Two points span one direction, ``d = s_a - s_b``: the principal axis is ``d`` with the sign
    :func:`.principal_axis.projections` gives it (its first largest component, within
    :data:`.principal_axis.LEADING`, positive), and ``a`` projects below ``b`` exactly when that component of
    ``d`` is negative. Equal shares project alike: then the code order (``a`` first)."""
    d = shares[:, 0] - shares[:, 1]
    size = np.abs(d)
    big = np.argmax(size >= (1 - LEADING) * size.max(axis=1, keepdims=True), axis=1)
    return np.take_along_axis(d, big[:, None], axis=1)[:, 0] <= 0


#: candidates ordered together (their (candidates, k, K) arrays: 0.6 MiB at k = 8, K = 10)
BLOCK = 1024


def left_sets(pos: NDArray[np.int64], weight: NDArray[np.float64], cut: NDArray[np.float64],
              missing_left: NDArray[np.bool_], words: int) -> NDArray[np.uint64]:
    """Bit sets of the categories sent left: present with position <= cut, or absent when missing go left."""
    left = np.where(weight > 0, pos <= cut[:, None], missing_left[:, None])
    padded = np.zeros((left.shape[0], words * 64), dtype=bool)
    padded[:, :left.shape[1]] = left
    return np.packbits(padded, axis=1, bitorder="little").view(np.uint64)


def in_left_set(sets: NDArray[np.uint64], code: NDArray[np.float64]) -> NDArray[np.bool_]:
    """Whether category ``code`` (non-NaN) is in the left set on the same row of ``sets``."""
    c = code.astype(np.int64)
    word = np.take_along_axis(sets, (c // 64)[:, None], axis=1)[:, 0]
    return ((word >> (c % 64).astype(np.uint64)) & np.uint64(1)).astype(bool)
