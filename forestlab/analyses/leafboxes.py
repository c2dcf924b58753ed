"""Partial dependences of a tree at a sample's own values, from the box of every leaf, without made-up rows.

A leaf is reached by a case when, for every feature, the case's value passes all the splits on that feature
along the leaf's path (prediction's routes: thresholds, missing values, category sets). Write ``A[l, i, j]``
for "sample case ``i`` passes leaf ``l``'s splits on feature ``j``". A made-up row that takes features ``S``
from case ``i`` and the rest from case ``r`` reaches leaf ``l`` exactly when ``A[l, i, j]`` holds for every
``j`` in ``S`` and ``A[l, r, j]`` for every other ``j``, so the partial dependence on ``S`` at case ``i``,
the mean over ``r`` of the tree's output at those rows, is

    F_S(i) = (1 / N) sum_l v_l * [A[l, i, j] for all j in S] * #{r : A[l, r, j] for all j not in S}.

With ``fail[l, r]`` the number of features case ``r`` fails at leaf ``l``, the count is that of the cases
whose failures all lie in ``S``. Each partial dependence then costs ``O(leaves * N)`` per tree instead of the
``O(N^2)`` predictions of the made-up rows; the values are the same (up to the order of additions).
"""

from __future__ import annotations

import itertools

import numpy as np
from numpy.typing import NDArray

from ..engine.tree import Tree, goes_right

__all__ = ["TreeDependences", "leaf_passes", "tree_dependences"]

TreeDependences = tuple[NDArray, dict[int, NDArray], dict[tuple[int, int], NDArray], dict[int, NDArray]]


def leaf_passes(tree: Tree, sample: NDArray[np.float64], missing: bool) -> tuple[NDArray[np.bool_], NDArray[np.intp]]:
    """``A`` (leaves, N, p) and the leaves' node indices, one pass down the tree level by level."""
    N, p = sample.shape
    left, feature = tree.left, tree.feature
    passes = np.ones((1, N, p), dtype=bool)
    level = np.array([0])
    kept, leaves = [], []
    row_ids = np.arange(N)
    while level.size:
        is_leaf = feature[level] < 0
        kept.append(passes[is_leaf])
        leaves.append(level[is_leaf])
        node = level[~is_leaf]
        if node.size == 0:
            break
        right = goes_right(sample, np.tile(row_ids, node.size), np.repeat(node, N), tree.feature, tree.threshold,
                           tree.missing_left, tree.category_left, missing).reshape(node.size, N)
        passes = np.repeat(passes[~is_leaf], 2, axis=0)
        j = np.repeat(feature[node], 2)
        child = np.arange(passes.shape[0])
        took = np.stack([~right, right], axis=1).reshape(-1, N)
        passes[child, :, j] &= took
        level = (left[node][:, None] + np.array([0, 1])).ravel()
    return np.concatenate(kept), np.concatenate(leaves)


def tree_dependences(tree: Tree, sample: NDArray[np.float64], chosen: list[int], code: int | None,
                     missing: bool) -> TreeDependences:
    """One tree's output at the sample, and its partial dependences (unscaled by 1 / N) on every chosen feature,
    every pair of them and every complement of one, all at the sample's own values."""
    A, leaf = leaf_passes(tree, sample, missing)
    value = tree.value[leaf]
    v = value if code is None else (value == code).astype(np.float64)
    keep = v != 0                                   # leaves of output 0 add nothing
    A, v = A[keep], v[keep]
    fails = (A.shape[2] - np.count_nonzero(A, axis=2)).astype(np.int16 if A.shape[2] < 2**15 else np.int32)
    clear = fails == 0
    whole = _weighted_rows(v, clear)
    cols = {j: np.ascontiguousarray(A[:, :, j]) for j in chosen}
    single, rest = {}, {}
    for j, Aj in cols.items():
        but_j = clear | ((fails == 1) & ~Aj)        # fails nothing but (maybe) j
        single[j] = _weighted_rows(v * np.count_nonzero(but_j, axis=1), Aj)
        rest[j] = _weighted_rows(v * np.count_nonzero(Aj, axis=1), but_j)
    pairs = {}
    for j, k in itertools.combinations(chosen, 2):
        Aj, Ak = cols[j], cols[k]
        within = fails == (~Aj).view(np.uint8) + (~Ak).view(np.uint8)
        pairs[(j, k)] = _weighted_rows(v * np.count_nonzero(within, axis=1), Aj & Ak)
    return whole, single, pairs, rest


def _weighted_rows(weight: NDArray[np.float64], passes: NDArray[np.bool_]) -> NDArray[np.float64]:
    """``weight @ passes`` over the leaves of non-zero weight only (deep leaves often count no case)."""
    used = np.flatnonzero(weight)
    return weight[used] @ passes[used]
