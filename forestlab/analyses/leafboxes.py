"""Partial dependences of a tree at a sample's own values, from the box of every leaf, without made-up rows.

A leaf is reached by a case when, for every feature, the case's value passes all the splits on that feature
along the leaf's path (prediction's routes: thresholds, missing values, category sets). Write ``A[l, j, i]``
for "sample case ``i`` passes leaf ``l``'s splits on feature ``j``". A made-up row that takes features ``S``
from case ``i`` and the rest from case ``r`` reaches leaf ``l`` exactly when ``A[l, j, i]`` holds for every
``j`` in ``S`` and ``A[l, j, r]`` for every other ``j``, so the partial dependence on ``S`` at case ``i``,
the mean over ``r`` of the tree's output at those rows, is

    F_S(i) = (1 / N) sum_l v_l * [A[l, j, i] for all j in S] * #{r : A[l, j, r] for all j not in S}.

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


def leaf_passes(tree: Tree, sample: NDArray[np.float64],
                missing: bool) -> tuple[NDArray[np.bool_], NDArray[np.int32], NDArray[np.intp]]:
    """``A`` as (leaves, p, N) booleans, the number of features every case fails at every leaf (leaves, N),
    and the leaves' node indices: one pass down the tree level by level."""
    N, p = sample.shape
    left, feature = tree.left, tree.feature
    passes = np.ones((1, p, N), dtype=bool)
    fails = np.zeros((1, N), dtype=np.int32)
    level = np.array([0])
    kept, failed, leaves = [], [], []
    row_ids = np.arange(N)
    while level.size:
        is_leaf = feature[level] < 0
        kept.append(passes[is_leaf])
        failed.append(fails[is_leaf])
        leaves.append(level[is_leaf])
        node = level[~is_leaf]
        if node.size == 0:
            break
        right = goes_right(sample, np.tile(row_ids, node.size), np.repeat(node, N), tree.feature, tree.threshold,
                           tree.missing_left, tree.category_left, missing).reshape(node.size, N)
        passes = np.repeat(passes[~is_leaf], 2, axis=0)
        fails = np.repeat(fails[~is_leaf], 2, axis=0)
        j = np.repeat(feature[node], 2)
        child = np.arange(passes.shape[0])
        took = np.stack([~right, right], axis=1).reshape(-1, N)
        was = passes[child, j]
        fails += was & ~took
        passes[child, j] = was & took
        level = (left[node][:, None] + np.array([0, 1])).ravel()
    return np.concatenate(kept), np.concatenate(failed), np.concatenate(leaves)


def tree_dependences(tree: Tree, sample: NDArray[np.float64], chosen: list[int], code: int | None,
                     missing: bool) -> TreeDependences:
    """One tree's output at the sample, and its partial dependences (unscaled by 1 / N) on every chosen feature,
    every pair of them and every complement of one, all at the sample's own values.

    The counts of cases whose failures lie in a set come from the cases that fail at most two features of a
    leaf: ``n0`` (none), ``n1[l, f]`` (only ``f``) and ``n2[l, pair]`` (only the pair's two).
    """
    A, fails, leaf = leaf_passes(tree, sample, missing)
    value = tree.value[leaf]
    v = value if code is None else (value == code).astype(np.float64)
    keep = np.flatnonzero(v != 0)                   # leaves of output 0 add nothing
    A, fails, v = A[keep], fails[keep], v[keep]
    L, p, N = A.shape
    clear = fails == 0
    n0 = np.count_nonzero(clear, axis=1)
    where = {}                                      # (leaf, case, failed features) of 1 and of 2 failures
    for count in (1, 2):
        at_leaf, case = np.nonzero(fails == count)
        failed = np.nonzero(~A[at_leaf, :, case])[1].reshape(-1, count)
        where[count] = (at_leaf, case, failed)
    n1 = np.bincount(where[1][0] * p + where[1][2][:, 0], minlength=L * p).reshape(L, p)
    pair_list = list(itertools.combinations(chosen, 2))
    pair_id = np.full((p, p), -1, dtype=np.intp)
    for i, (j, k) in enumerate(pair_list):
        pair_id[j, k] = pair_id[k, j] = i
    at_leaf, _, failed = where[2]
    ids = pair_id[failed[:, 0], failed[:, 1]]
    mine = ids >= 0
    n2 = np.bincount(at_leaf[mine] * len(pair_list) + ids[mine], minlength=L * len(pair_list))
    n2 = n2.reshape(L, len(pair_list))
    whole = _over_leaves(v, clear)
    cols = {j: A[:, j] for j in chosen}
    single, rest = {}, {}
    at_leaf, case, failed = where[1]
    for j, Aj in cols.items():
        single[j] = _over_leaves(v * (n0 + n1[:, j]), Aj)
        weight = v * np.count_nonzero(Aj, axis=1)
        only_j = failed[:, 0] == j
        rest[j] = _over_leaves(weight, clear) + np.bincount(case[only_j], weights=weight[at_leaf[only_j]],
                                                            minlength=N)
    pairs = {}
    for i, (j, k) in enumerate(pair_list):
        pairs[(j, k)] = _over_leaves(v * (n0 + n1[:, j] + n1[:, k] + n2[:, i]), cols[j] & cols[k])
    return whole, single, pairs, rest


def _over_leaves(weight: NDArray[np.float64], passes: NDArray[np.bool_]) -> NDArray[np.float64]:
    """``sum_l weight[l] * passes[l, i]`` for every case ``i`` (an einsum loop, not a BLAS call: on a busy
    machine BLAS threads made this product a hundred times slower)."""
    return np.einsum("l,li->i", weight, passes)
