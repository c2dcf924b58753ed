"""forestlab's flat trees as the node and leaf lists of the open standard's tree-ensemble operator.

The operator (``TreeEnsemble`` of the ``ai.onnx.ml`` domain, opset 5) lists the inner nodes of all trees in
``nodes_*`` attributes and the leaves in ``leaf_*`` attributes; a node's true and false branches name either
another node or a leaf. A forestlab tree is breadth-first with the children of node ``k`` at ``left[k]`` and
``left[k] + 1``, so every tree maps in a few whole-array steps:

- a numeric split is ``BRANCH_LEQ`` at the float32 threshold of :mod:`.thresholds` (true: left);
- a categorical split is ``BRANCH_MEMBER`` on the category codes that go left (true: left), the sets listed
  in ``membership_values`` node after node, each closed by a NaN;
- the missing-value track of a node is its ``missing_left`` (1: a NaN takes the true branch, left);
- a leaf adds weight 1 to the target of its class index (classification), or its mean to target 0;
- a tree that is a single leaf gets one node whose branches both name that leaf, as the standard says.

One addition keeps a widely used runtime exact: onnxruntime (1.32) evaluates a set-membership node whose
false branch is another set-membership node on the same feature as if the two sets were one (it merges
such chains). Such a false branch goes through a pass-through node instead (``BRANCH_LEQ`` at +inf, NaN on
the true track, so every value takes its true branch; its false branch is a leaf of weight 0 that nothing
reaches), which the standard evaluates exactly as without it.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ..analyses.view import FittedForest
from ..engine.tree import Tree

__all__ = ["BRANCH_LEQ", "BRANCH_MEMBER", "ensemble_lists"]

BRANCH_LEQ, BRANCH_MEMBER = 0, 6  # the operator's node modes


def ensemble_lists(forest: FittedForest, thresholds: list[NDArray[np.float32]]) -> dict[str, NDArray]:
    """Every tree of ``forest`` in the operator's lists, trees one after another in seed order, with the
    float32 ``thresholds`` of every tree's nodes (:func:`.thresholds.forest_thresholds`).

    Returns the operator's attributes by their names in the standard: ``tree_roots``, the ``nodes_*`` lists
    (modes uint8, splits float32, the rest int64), ``leaf_targetids``, ``leaf_weights`` (float32) and, when
    there are categorical splits, ``membership_values`` (float32).
    """
    categories = np.zeros(forest.features, np.int64)
    for j, values in forest.levels.items():
        categories[j] = values.size
    parts = [_tree_lists(tree, split, forest.task == "classification", categories)
             for tree, split in zip(forest.trees, thresholds)]
    node_base = _starts([p["nodes_modes"].size for p in parts])
    leaf_base = _starts([p["leaf_weights"].size for p in parts])
    for p, nodes, leaves in zip(parts, node_base, leaf_base):
        for side in ("true", "false"):
            p[f"nodes_{side}nodeids"] += np.where(p[f"nodes_{side}leafs"] == 1, leaves, nodes)
    lists = {name: np.concatenate([p[name] for p in parts]) for name in parts[0]}
    members = lists.pop("members")
    return {"tree_roots": node_base, **lists, **({"membership_values": members} if members.size else {})}


def _starts(sizes: list[int]) -> NDArray[np.int64]:
    return np.concatenate([[0], np.cumsum(sizes[:-1])]).astype(np.int64)


def _tree_lists(tree: Tree, split: NDArray[np.float32], classification: bool,
                categories: NDArray[np.int64]) -> dict[str, NDArray]:
    """One tree's lists, node and leaf ids counted from 0 within the tree (``split``: the float32 threshold of
    every node; ``categories``: the number of categories of every feature, 0 for a numeric one)."""
    inner = tree.feature >= 0
    value = tree.value[~inner]
    leaves = {"leaf_targetids": value.astype(np.int64) if classification else np.zeros(value.size, np.int64),
              "leaf_weights": np.ones(value.size, np.float32) if classification else value.astype(np.float32)}
    if not inner.any():  # a single leaf: one node, both branches to leaf 0
        none = np.zeros(1, np.int64)
        return {**_nodes(none, np.zeros(1, np.float32), (none, 1), (none, 1), none), **leaves,
                "members": np.zeros(0, np.float32)}
    rank = np.where(inner, np.cumsum(inner) - 1, np.cumsum(~inner) - 1)  # id among inner nodes, or among leaves
    at = np.flatnonzero(inner)
    left = tree.left[at]
    categorical = np.isnan(tree.threshold[at])
    nodes = _nodes(tree.feature[at], np.where(categorical, np.float32(0), split[at]),
                   (rank[left], ~inner[left]), (rank[left + 1], ~inner[left + 1]), tree.missing_left[at])
    nodes["nodes_modes"][categorical] = BRANCH_MEMBER
    members = _left_codes(tree.category_left[at[categorical]], categories[tree.feature[at[categorical]]])
    _pass_through(nodes, leaves)
    return {**nodes, **leaves, "members": members}


def _nodes(feature: NDArray, split: NDArray, true: tuple, false: tuple, missing_true: NDArray) -> dict[str, NDArray]:
    """Lists of ``BRANCH_LEQ`` nodes; ``true`` and ``false`` are (ids, is-leaf flags) of the branches."""
    count = feature.size
    ints = {"nodes_featureids": feature, "nodes_truenodeids": true[0], "nodes_trueleafs": true[1],
            "nodes_falsenodeids": false[0], "nodes_falseleafs": false[1],
            "nodes_missing_value_tracks_true": missing_true}
    return {"nodes_modes": np.full(count, BRANCH_LEQ, np.uint8), "nodes_splits": split.astype(np.float32),
            **{name: np.broadcast_to(v, count).astype(np.int64) for name, v in ints.items()}}


def _pass_through(nodes: dict[str, NDArray], leaves: dict[str, NDArray]) -> None:
    """Route the false branch of every set-membership node whose false branch is a set-membership node on
    the same feature through a new pass-through node (see the module docstring); in place."""
    member = nodes["nodes_modes"] == BRANCH_MEMBER
    child = nodes["nodes_falsenodeids"]
    inner_child = nodes["nodes_falseleafs"] == 0
    fix = np.flatnonzero(member & inner_child & member[np.where(inner_child, child, 0)]
                         & (nodes["nodes_featureids"][np.where(inner_child, child, 0)] == nodes["nodes_featureids"]))
    if fix.size == 0:
        return
    new = nodes["nodes_modes"].size + np.arange(fix.size)
    dead = leaves["leaf_weights"].size + np.arange(fix.size)
    extra = _nodes(nodes["nodes_featureids"][fix], np.full(fix.size, np.inf, np.float32), (child[fix], 0),
                   (dead, 1), np.ones(1, np.int64))
    child[fix] = new
    for name, column in extra.items():
        nodes[name] = np.concatenate([nodes[name], column])
    leaves["leaf_targetids"] = np.concatenate([leaves["leaf_targetids"], np.zeros(fix.size, np.int64)])
    leaves["leaf_weights"] = np.concatenate([leaves["leaf_weights"], np.zeros(fix.size, np.float32)])


def _left_codes(sets: NDArray[np.uint64], categories: NDArray[np.int64]) -> NDArray[np.float32]:
    """The category codes (below each set's number of ``categories``) in each left set, set after set, each
    set followed by a NaN."""
    if sets.shape[0] == 0:
        return np.zeros(0, np.float32)
    bits = np.unpackbits(np.ascontiguousarray(sets, dtype="<u8").view(np.uint8), axis=1, bitorder="little")
    bits = bits.astype(bool) & (np.arange(bits.shape[1]) < categories[:, None])
    marked = np.concatenate([bits, np.ones((bits.shape[0], 1), bool)], axis=1)  # the closing NaN of each set
    codes = np.append(np.arange(bits.shape[1], dtype=np.float32), np.float32(np.nan))
    return codes[np.nonzero(marked)[1]]
