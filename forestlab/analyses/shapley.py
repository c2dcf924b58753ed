"""Exact path-dependent Shapley values of one tree's output, for a block of rows pushed down together.

The game is the one of Lundberg, Erion, Chen et al. (2020), "From local explanations to global understanding
with explainable AI for trees", Nature Machine Intelligence 2: the worth of a feature set ``S`` for a row
``x`` is the tree's expected output when the features in ``S`` follow ``x``'s route at their splits and every
other split sends the case both ways, weighted by the share of training cases (the node's ``cases``) each
child received. A leaf ``l`` then adds ``v_l * prod_j (o_j if j in S else q_j)`` to the worth, the product
over the distinct features ``j`` on its path, where ``q_j`` is the product of the cover shares of the path's
edges on ``j`` and ``o_j`` is 1 when ``x`` takes all of them, else 0 (features off the path are dummies).

How it is computed here (derived for this module; it needs no per-path stack of weights):

1. The Shapley weight ``|S|! (d - 1 - |S|)! / d!`` is the integral over ``t`` in [0, 1] of
   ``t^|S| (1 - t)^(d - 1 - |S|)``, so the share of feature ``i`` in a leaf's game is
   ``v_l (o_i - q_i) * integral of prod_{j != i} g_j(t) dt`` with ``g_j(t) = q_j + t (o_j - q_j)``: the
   integral of a polynomial of degree at most ``d - 1``, which Gauss-Legendre quadrature on ``m`` points
   integrates exactly when ``2m >= d`` (``d`` = the most distinct features on any path).
2. Write ``G_l(t) = prod_j g_j(t)`` over the leaf's path. If feature ``i`` is split on at edges
   ``e_1 .. e_r`` of the path (``g^(s)``, ``o^(s)``, ``q^(s)`` the running products up to ``e_s``), then
   ``(o^(r) - q^(r)) / g^(r)`` telescopes into the sum over ``s`` of
   ``c_s(t) = (o^(s) - q^(s)) / g^(s) - (o^(s-1) - q^(s-1)) / g^(s-1)`` (the term for no edge is 0), and
   ``c_s`` depends on the edge only, not on the leaf below it. Hence
   ``phi_i = sum over edges e on feature i of integral of c_e(t) S_e(t) dt`` with
   ``S_e(t) = sum of v_l G_l(t)`` over the leaves below ``e``. The identity holds at every quadrature point,
   so the sum of the quadratures is the exact quadrature of a polynomial.
3. Per edge and row, ``o^(s-1)`` and ``o^(s)`` are 0 or 1 with ``o^(s) <= o^(s-1)``: three cases (code
   ``o^(s-1) + o^(s)``), so ``g^(s) / g^(s-1)`` (which updates ``G`` down the tree) and ``c_s`` are read from
   per-node tables of three rows of ``m`` values; code 0 (the row already left feature ``i``'s interval
   higher up) has ``c_s = 0``.

So one pass down the tree, level by level, forms ``G`` at every node for all rows of a block at once (the
quadrature weights folded into ``G`` at the root), and one pass up forms ``S`` (a leaf's ``v_l G_l``; an
inner node's the sum of its children's) and every edge's share. The work is ``O(nodes * m)`` per row and
tree, ``m = ceil(d / 2) <= ceil(min(depth, p) / 2)``. Routes (thresholds, missing values, category sets)
are prediction's own (:func:`~forestlab.engine.tree.goes_right`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from ..engine.tree import Tree, goes_right

__all__ = ["TreeGame", "block_rows", "tree_game", "tree_shares"]


@dataclass(frozen=True, eq=False)
class TreeGame:
    """What the Shapley values of one tree need that does not depend on the rows (see the module notes).

    Attributes
    ----------
    tree : Tree
    levels : list of (int, int)
        Node range ``start:stop`` of every depth (nodes are stored breadth-first).
    at : list of Level
        What the passes read at every depth (positions of leaves and inner nodes, the children's range, ...).
    edge_feature : ndarray of intp, shape (nodes,)
        Feature of the split above every node (-1 at the root).
    earlier : ndarray of intp, shape (nodes,)
        The node below the nearest earlier edge on the same feature, or ``nodes`` when there is none.
    step : ndarray of float64, shape (m, nodes * 3)
        ``g^(s) / g^(s-1)`` at every quadrature point, column ``3 * node + code``; at a leaf of a game of one
        output column also times the leaf's output, so the pass down lands on ``v_l G_l`` there.
    change : ndarray of float64, shape (nodes, 1, 2, m)
        At every quadrature point: ``c_s`` of code 1, and that of code 2 less that of code 1 (``c_s`` is 0 for
        code 0), so an edge's share is ``o_before (change[0] . S) + o_now (change[1] . S)``.
    weights : ndarray of float64, shape (m,)
        Gauss-Legendre weights on [0, 1].
    outputs : ndarray of float64, shape (nodes, k)
        The output of every leaf (0 at inner nodes): its value, or one-hot columns of the classes after the
        first (``k = K - 1``: the first class's shares are minus the sum of the others', since the vote
        shares always sum to 1).
    baseline : ndarray of float64, shape (1,) or (K,)
        The tree's expected output over its training cases (every class's, for classification): sum of leaf
        outputs times cover shares.
    """

    tree: Tree
    levels: list[tuple[int, int]]
    at: list[Level]
    edge_feature: NDArray[np.intp]
    earlier: NDArray[np.intp]
    step: NDArray[np.float64]
    change: NDArray[np.float64]
    weights: NDArray[np.float64]
    outputs: NDArray[np.float64]
    baseline: NDArray[np.float64]
    index_for: list = field(default_factory=lambda: [0, None])

    @property
    def points(self) -> int:
        """Quadrature points ``m``."""
        return int(self.weights.size)


def tree_game(tree: Tree, features: int, classes: int | None) -> TreeGame:
    """The row-free tables of ``tree`` (``classes`` None for regression, else the number of classes).

    A child's cover share is its ``cases`` over the sum of its and its sibling's, so the shares of two children
    add up to 1 even where the single-precision counts of weighted cases do not add up exactly.
    """
    nodes = tree.nodes
    depth = tree.depth
    bounds = np.flatnonzero(np.diff(depth)) + 1
    starts = np.concatenate([[0], bounds])
    levels = list(zip(starts.tolist(), np.concatenate([bounds, [nodes]]).tolist()))
    left, feature = tree.left, tree.feature.astype(np.intp)
    parent = np.full(nodes, -1, dtype=np.intp)
    inner = np.flatnonzero(feature >= 0)
    parent[left[inner]] = inner
    parent[left[inner] + 1] = inner
    edge_feature = np.where(parent >= 0, feature[np.maximum(parent, 0)], -1)
    earlier, distinct = _earlier_edges(levels, parent, edge_feature, feature >= 0, features)
    cases = tree.cases.astype(np.float64)
    share_of_parent = np.ones(nodes)
    below = parent[1:]
    pair = cases[left[below]] + cases[left[below] + 1]
    share_of_parent[1:] = cases[1:] / pair
    cover = np.ones(nodes)        # product of the cover shares from the root
    q = np.ones(nodes + 1)        # running product of cover shares of the edges on the edge's feature
    for start, stop in levels[1:]:
        here = np.arange(start, stop)
        cover[here] = cover[parent[here]] * share_of_parent[here]
        q[here] = q[earlier[here]] * share_of_parent[here]
    m = max(1, math.ceil(distinct / 2))
    x, w = np.polynomial.legendre.leggauss(m)
    t, weights = (x + 1.0) / 2.0, w / 2.0
    step, change = _tables(q[:nodes], q[earlier], t)
    leaf = feature < 0
    if classes is None:
        outputs = np.where(leaf, tree.value, 0.0)[:, None]
    else:
        every = np.zeros((nodes, classes))
        every[np.flatnonzero(leaf), tree.value[leaf].astype(np.intp)] = 1.0
        outputs = every[:, 1:]
    baseline = cover @ (outputs if classes is None else every)
    if outputs.shape[1] == 1:
        step.reshape(m, nodes, 3)[:, leaf] *= outputs[leaf, 0][None, :, None]
    at = [_level(tree, start, stop, earlier) for start, stop in levels]
    return TreeGame(tree=tree, levels=levels, at=at, edge_feature=edge_feature, earlier=earlier, step=step,
                    change=change, weights=weights, outputs=outputs, baseline=baseline)


class Level(NamedTuple):
    """One depth of a tree as the passes read it."""

    leaf: NDArray[np.intp]          # positions of the leaves in the level's range
    inner: NDArray[np.intp]         # positions of the inner nodes
    node: NDArray[np.intp]          # the inner nodes
    lo: int                         # their children are nodes lo:hi
    hi: int
    earlier: NDArray[np.intp]       # earlier[lo:hi]
    offset: NDArray[np.intp]        # 3 * (lo:hi), shape (hi - lo, 1)
    split: NDArray[np.intp]         # the inner nodes' features
    threshold: NDArray[np.float64]  # and thresholds, shape (inner, 1)


def _level(tree: Tree, start: int, stop: int, earlier: NDArray[np.intp]) -> Level:
    feature = tree.feature[start:stop]
    inner = np.flatnonzero(feature >= 0)
    node = start + inner
    lo, hi = (int(tree.left[node[0]]), int(tree.left[node[-1]]) + 2) if node.size else (stop, stop)
    return Level(leaf=np.flatnonzero(feature < 0), inner=inner, node=node, lo=lo, hi=hi, earlier=earlier[lo:hi],
                 offset=(np.arange(lo, hi) * 3)[:, None], split=tree.feature[node].astype(np.intp),
                 threshold=tree.threshold[node][:, None])


def _earlier_edges(levels, parent, edge_feature, inner, features: int) -> tuple[NDArray[np.intp], int]:
    """For every node the node below the nearest earlier edge on its edge's feature (``nodes`` when none),
    and the largest number of distinct features on a path; one table of the last edge per feature per level."""
    nodes = inner.size
    earlier = np.full(nodes, nodes, dtype=np.intp)
    last = np.full((1, features), nodes, dtype=np.intp)
    distinct = 0
    for start, stop in levels[1:]:
        here = np.arange(start, stop)
        # the level's nodes are the children of the previous level's inner nodes, in order
        _, from_parent = np.unique(parent[here], return_inverse=True)
        last = last[from_parent]
        rows = np.arange(here.size)
        earlier[here] = last[rows, edge_feature[here]]
        last[rows, edge_feature[here]] = here
        distinct = max(distinct, int(np.max(np.count_nonzero(last < nodes, axis=1))))
        last = last[inner[here]]
    return earlier, distinct


def _tables(q: NDArray[np.float64], q_before: NDArray[np.float64], t: NDArray[np.float64]):
    """``g^(s) / g^(s-1)`` for the three codes (0: left the feature's interval earlier; 1: leaves it here;
    2: stays in it), and ``c_s`` of code 1 with that of code 2 less that of code 1 (code 0's is 0)."""
    q, q_before = q[:, None], q_before[:, None]
    stay, stay_before = q + t * (1.0 - q), q_before + t * (1.0 - q_before)   # g when o = 1
    gone = q * (1.0 - t)                                                       # g when o = 0
    nodes, m = q.shape[0], t.size
    step = np.empty((nodes, 3, m))
    change = np.empty((nodes, 3, m))
    step[:, 0] = q / q_before                     # gone / gone_before: the cover share of the edge
    step[:, 1] = gone / stay_before
    step[:, 2] = stay / stay_before
    before = (1.0 - q_before) / stay_before
    change[:, 1] = -1.0 / (1.0 - t) - before      # (0 - q) / gone = -1 / (1 - t)
    change[:, 2] = (1.0 - q) / stay + 1.0 / (1.0 - t)   # c_s of code 2 less that of code 1
    return np.ascontiguousarray(step.reshape(nodes * 3, m).T), change[:, None, 1:].copy()


def tree_shares(game: TreeGame, X: NDArray[np.float64], missing: bool = True,
                scratch: NDArray[np.float64] | None = None) -> NDArray[np.float64]:
    """Shapley values of every feature for every row of ``X`` (a block): shape (rows, p, k), for the columns
    of ``game.outputs`` (see :class:`TreeGame` for the first class of a classification).

    ``X`` is coded like the training predictors.
    ``scratch``, a float64 buffer of at least ``nodes * rows * (k * m + k + 2)`` values, holds the passes'
    arrays (reusing one buffer for every block saves the fresh memory pages).
    """
    rows, p = X.shape
    nodes, k = game.tree.nodes, game.outputs.shape[1]
    if nodes == 1 or k == 0:
        return np.zeros((rows, p, k))
    sizes = [nodes * k * game.points * rows, (nodes - 1) * k * rows, (nodes - 1) * rows, (nodes - 1) * rows]
    if scratch is None or scratch.size < sum(sizes):
        scratch = np.empty(sum(sizes))
    ends = np.cumsum(sizes)
    parts = [scratch[e - size:e] for e, size in zip(ends, sizes)]
    S = parts[0].reshape(nodes, k, game.points, rows)
    before, now = parts[2].reshape(nodes - 1, rows), parts[3].reshape(nodes - 1, rows)
    _down(game, X, missing, S, before, now)
    contribution = _up(game, S, before, now, parts[1].reshape(nodes - 1, k, rows))
    summed = np.bincount(_feature_index(game, rows), weights=contribution.ravel(), minlength=p * k * rows)
    return summed.reshape(p, k, rows).transpose(2, 0, 1)


def _feature_index(game: TreeGame, rows: int) -> NDArray[np.intp]:
    """Where every (edge, class, row) share goes in the (p, k, rows) sums; kept for the block size in use."""
    cached = game.index_for
    if cached[0] != rows:
        k = game.outputs.shape[1]
        index = (game.edge_feature[1:, None, None] * k + np.arange(k)[:, None]) * rows + np.arange(rows)
        cached[:] = [rows, index.ravel()]
    return cached[1]


def block_rows(game: TreeGame, budget: int) -> int:
    """Rows per block so that the passes' arrays of one block hold about ``budget`` float64 values."""
    k = game.outputs.shape[1]
    per_row = game.tree.nodes * (k * game.points + k + 3)
    return max(1, budget // per_row)


def _routes(game: TreeGame, X: NDArray[np.float64], columns: NDArray[np.float64], at: Level,
            missing: bool) -> NDArray[np.bool_]:
    """Whether every row goes right at every inner node of the level: shape (inner nodes, rows)."""
    tree, node = game.tree, at.node
    if missing or tree.category_left.shape[1]:
        rows = X.shape[0]
        return goes_right(X, np.tile(np.arange(rows), node.size), np.repeat(node, rows), tree.feature,
                          tree.threshold, tree.missing_left, tree.category_left, missing).reshape(node.size, rows)
    return columns[at.split] > at.threshold


def _down(game: TreeGame, X: NDArray[np.float64], missing: bool, S: NDArray[np.float64],
          before_out: NDArray[np.float64], now_out: NDArray[np.float64]) -> None:
    """The pass down: ``G`` level by level; writes ``v_l G_l`` of every leaf into ``S`` (nodes, k, m, rows;
    the pass up fills the inner nodes), and ``o`` before and after every edge into ``before_out`` and
    ``now_out`` (nodes - 1, rows) as 0.0 / 1.0."""
    tree, m, rows = game.tree, game.points, X.shape[0]
    nodes = tree.nodes
    took = np.ones((nodes + 1, rows), dtype=bool)    # o: the row took every edge on the feature so far
    G = np.broadcast_to(game.weights[:, None, None], (m, 1, rows))   # planes: (m, level nodes, rows)
    columns = np.ascontiguousarray(X.T)
    for d, (start, _) in enumerate(game.levels):
        at = game.at[d]
        _leaf_shares(S, G, start + at.leaf, at.leaf, game.outputs, d == 0)
        if d + 1 == len(game.levels):
            break
        node, lo, hi = at.node, at.lo, at.hi
        right = _routes(game, X, columns, at, missing)
        before = took[at.earlier].reshape(node.size, 2, rows)
        now = took[lo:hi].reshape(node.size, 2, rows)
        np.logical_and(before[:, 0], ~right, out=now[:, 0])
        np.logical_and(before[:, 1], right, out=now[:, 1])
        before, now = before.reshape(hi - lo, rows), now.reshape(hi - lo, rows)
        np.copyto(before_out[lo - 1:hi - 1], before)
        np.copyto(now_out[lo - 1:hi - 1], now)
        flat = before.view(np.uint8) + now.view(np.uint8)
        flat = flat + at.offset
        parents = G[:, at.inner]
        G = np.take(game.step, flat, axis=1)
        G.reshape(m, node.size, 2, rows)[...] *= parents[:, :, None, :]


def _leaf_shares(S: NDArray[np.float64], G: NDArray[np.float64], nodes: NDArray[np.intp], at: NDArray[np.intp],
                 outputs: NDArray[np.float64], root: bool) -> None:
    """``S[nodes] = v G`` for the leaves at positions ``at`` of the level's planes ``G`` (m, level, rows); with
    one output column ``v`` is in ``G`` already (see :attr:`TreeGame.step`), except at the root."""
    if not at.size:
        return
    if outputs.shape[1] == 1:
        if root:
            S[nodes, 0] = G[:, at].transpose(1, 0, 2) * outputs[nodes, 0][:, None, None]
            return
        for t in range(G.shape[0]):                       # plane by plane: rows copied whole, no transposing view
            S[nodes, 0, t] = G[t, at]
        return
    S[nodes] = np.take(G, at, axis=1).transpose(1, 0, 2)[:, None] * outputs[nodes][:, :, None, None]


def _up(game: TreeGame, S: NDArray[np.float64], before: NDArray[np.float64], now: NDArray[np.float64],
        contribution: NDArray[np.float64]) -> NDArray[np.float64]:
    """The pass up: ``S`` summed into every inner node, level by level, and every edge's share
    ``o_before (c_1 . S) + o_now ((c_2 - c_1) . S)``: shape (nodes - 1, k, rows)."""
    for d in range(len(game.levels) - 1, 0, -1):
        start, stop = game.levels[d]
        at = game.at[d]
        if d + 1 < len(game.levels):
            below = S[game.levels[d + 1][0]:game.levels[d + 1][1]]
            S[at.node] = below[0::2] + below[1::2]
        both = game.change[start:stop] @ S[start:stop]        # (nodes, k, 2, rows)
        here = contribution[start - 1:stop - 1]
        np.multiply(both[:, :, 0], before[start - 1:stop - 1, None], out=here)
        here += both[:, :, 1] * now[start - 1:stop - 1, None]
    return contribution
