"""A level searched in blocks of candidates (``level_blocks.BLOCK_ELEMENTS``) picks the splits of the search
of the whole level, bit for bit.

Reference: the same code with one block a level (the default budget, far above these small fits). Tiny
budgets are forced through the module constant, so that levels are searched a few nodes at a time and the
large nodes one or two candidates at a time; every node array of every tree, and the float64 decrease of
every node before it is stored as float32, must be equal. The two fast paths (two classes, Gini and entropy;
squared error, with and without case weights), with and without ties and a binding ``min_leaf``, batches of
one and of several trees, the per-tree sampler and a sampler giving nodes different numbers of candidates
are covered, and duplicated columns force exact ties between blocks (the node is then searched again whole),
for both ways of cutting a level: ranges of nodes, and (two classes, as many candidates at every node) the
same candidates of every node.
"""

from __future__ import annotations

import numpy as np
import pytest

import forestlab as fl
from forestlab.engine import grow, level_blocks

_ARRAYS = ("feature", "threshold", "value", "cases", "impurity_decrease", "missing_left")


class _SomeOfThem(fl.CandidateSampler):
    """Each feature a candidate with probability one half (at least one): nodes differ in their count."""

    def draw(self, rng, nodes, features):
        mask = rng.random((nodes, features)) < 0.5
        mask[np.arange(nodes), rng.integers(0, features, size=nodes)] = True
        return mask


def _problem(task: str, ties: bool, n: int = 1000, p: int = 5, seed: int = 3):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    if ties:
        X = np.round(X, 1)
    if task == "classification":
        y = (X[:, 0] + X[:, 1] * X[:, 2] + 0.5 * rng.normal(size=n) > 0).astype(int)
    else:
        y = np.sin(3 * X[:, 0]) + X[:, 1] * X[:, 2] + 0.3 * rng.normal(size=n) + 50.0
    return X, y


def _grown(monkeypatch, budget: int, X, y, weights=None, **settings):
    """The forest and the float64 decreases of every level, with ``budget`` elements a block, and how many
    levels were searched in blocks."""
    decreases, blocked = [], []
    level, groups, slots = grow._grow_level, level_blocks._node_groups, level_blocks._slot_blocks

    def spy_level(*args, **kwargs):
        out = level(*args, **kwargs)
        decreases.append(out[0]["decrease"].copy())
        return out

    def spy_groups(*args):
        blocked.append(1)
        return groups(*args)

    def spy_slots(*args):
        blocked.append(1)
        return slots(*args)

    with monkeypatch.context() as m:
        m.setattr(level_blocks, "BLOCK_ELEMENTS", budget)
        m.setattr(grow, "_grow_level", spy_level)
        m.setattr(level_blocks, "_node_groups", spy_groups)
        m.setattr(level_blocks, "_slot_blocks", spy_slots)
        forest = fl.Forest(**settings).fit(X, y, weights)
    return forest, np.concatenate(decreases), len(blocked)


def _assert_same(one, blocks) -> None:
    (a, dec_a, _), (b, dec_b, levels) = one, blocks
    assert levels > 3  # (the small budget did split levels into blocks)
    assert dec_a.tobytes() == dec_b.tobytes()
    for i in range(a.trees):
        for name in _ARRAYS:
            x, z = getattr(a.tree(i), name), getattr(b.tree(i), name)
            assert x.tobytes() == z.tobytes(), (i, name)
    assert a.inbag.tobytes() == b.inbag.tobytes()


@pytest.mark.parametrize("budget", [40, 2000])
@pytest.mark.parametrize("splitter", ["gini", "entropy"])
@pytest.mark.parametrize("ties", [False, True])
@pytest.mark.parametrize("min_leaf", [1, 3])
def test_two_classes_in_blocks_grow_the_same_trees(monkeypatch, budget, splitter, ties, min_leaf):
    X, y = _problem("classification", ties)
    settings = dict(trees=4, sampler=2, splitter=splitter, min_leaf=min_leaf, rng=7)
    _assert_same(_grown(monkeypatch, 1 << 40, X, y, **settings), _grown(monkeypatch, budget, X, y, **settings))


@pytest.mark.parametrize("budget", [40, 2000])
@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("ties", [False, True])
@pytest.mark.parametrize("min_leaf", [1, 5])
def test_squared_error_in_blocks_grows_the_same_trees(monkeypatch, budget, weighted, ties, min_leaf):
    X, y = _problem("regression", ties)
    weights = np.random.default_rng(1).uniform(0.2, 3.0, size=y.size) if weighted else None
    settings = dict(trees=4, sampler=2, min_leaf=min_leaf, task="regression", rng=7)
    _assert_same(_grown(monkeypatch, 1 << 40, X, y, weights, **settings),
                 _grown(monkeypatch, budget, X, y, weights, **settings))


@pytest.mark.parametrize("task", ["classification", "regression"])
@pytest.mark.parametrize("sampler", ["tree", "some", "all"])
def test_other_samplers_and_one_tree_batches_in_blocks(monkeypatch, task, sampler):
    X, y = _problem(task, ties=False, n=70_000, p=4)  # (more than 65 536 rows: one tree a batch)
    chosen = {"tree": fl.TreeSubspace(3), "some": _SomeOfThem(), "all": fl.AllFeatures()}[sampler]
    settings = dict(trees=2, sampler=chosen, min_leaf=20, depth_limit=9, task=task, rng=2)
    _assert_same(_grown(monkeypatch, 1 << 40, X, y, **settings), _grown(monkeypatch, 30_000, X, y, **settings))


@pytest.mark.parametrize("task", ["classification", "regression"])
def test_exact_ties_between_blocks_search_the_node_again(monkeypatch, task):
    X, y = _problem(task, ties=False, p=3)
    X = np.column_stack([X[:, :1], X[:, :1], X[:, 1:], X[:, :1]])  # feature 0 three times: exact ties
    again = []
    pick, close = level_blocks._clear_pick, level_blocks._close_blocks

    def spy_pick(results, parent):  # (ranges of nodes: squared error)
        chosen = pick(results, parent)
        again.append(chosen is None)
        return chosen

    def spy_close(results, parent):  # (the same candidates of every node: two classes)
        counts, chosen = close(results, parent)
        again.extend((counts[counts > 0] > 1).tolist())
        return counts, chosen

    monkeypatch.setattr(level_blocks, "_clear_pick", spy_pick)
    monkeypatch.setattr(level_blocks, "_close_blocks", spy_close)
    settings = dict(trees=3, sampler=fl.AllFeatures(), task=task, rng=4)
    one, blocks = _grown(monkeypatch, 1 << 40, X, y, **settings), _grown(monkeypatch, 40, X, y, **settings)
    assert any(again) and not all(again)  # some nodes were tied across blocks, others were clear
    _assert_same(one, blocks)
    used = np.concatenate([blocks[0].tree(i).feature for i in range(3)])
    assert np.any(used == 0) and not np.any((used == 1) | (used == 4))  # ties: the lowest of the copies


def test_the_generic_search_is_not_blocked(monkeypatch):
    X, y = _problem("classification", ties=False)
    X[::17, 1] = np.nan  # missing values: the generic search
    _, _, levels = _grown(monkeypatch, 1, X, y, trees=2, sampler=2, rng=1)
    assert levels == 0


@pytest.mark.parametrize("task", ["regression", "classification"])
@pytest.mark.parametrize("ties", [False, True])
def test_partition_in_blocks_of_items_grows_the_same_trees(monkeypatch, task, ties):
    # numeric levels send a block of items to their children at a time (grow._partition_blocks): integer
    # arithmetic only, so blocks of 7 items (a block boundary inside almost every node) change nothing
    rng = np.random.default_rng(21)
    X = rng.normal(size=(800, 5))
    X = np.round(X, 1) if ties else X
    y = X[:, 0] + X[:, 1] * X[:, 2] + 0.3 * rng.normal(size=800)
    y = (y > 0).astype(np.int64) if task == "classification" else y

    def fit():
        return fl.Forest(trees=4, sampler=2, task=task, rng=3).fit(X, y)

    whole = fit()
    monkeypatch.setattr(grow, "_PARTITION_BLOCK", 7)
    blocks = fit()
    assert whole.tree(0).feature.size > 50
    for i in range(whole.trees):
        for name in _ARRAYS:
            np.testing.assert_array_equal(getattr(whole.tree(i), name), getattr(blocks.tree(i), name), err_msg=name)
