"""The memory-bounded paths (blocks of trees, blocks of rows) give exactly what the unblocked ones give.

Reference: the unblocked path of the same code (one block holding every tree and row, predictions kept for
the second out-of-bag pass), and, for the predictions, ``per_tree`` reduced here in one piece. Small blocks
are forced through the module constants; every result must be equal bit for bit.
"""

from __future__ import annotations

import warnings
from dataclasses import fields

import numpy as np
import pytest

import forestlab as fl
from forestlab.analyses import cases as _cases
from forestlab.analyses import oob as _oob
from forestlab.engine import tree as _tree
from forestlab.engine.tree import _leaf_index_general


def _problem(task: str, missing: bool, seed: int = 0, n: int = 300, p: int = 4):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    y = (X[:, 0] + X[:, 1] > 0).astype(int) + (X[:, 2] > 1) if task == "classification" else \
        X[:, 0] + 0.5 * rng.normal(size=n)
    if missing:
        X[rng.random((n, p)) < 0.05] = np.nan
    return X, y


def _oob_arrays(forest) -> dict:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", fl.NeverOutOfBagWarning)
        oob = _oob.out_of_bag(forest._fitted_view())  # computed afresh (not the forest's cached result)
    return {f.name: getattr(oob, f.name) for f in fields(oob)
            if isinstance(getattr(oob, f.name), (np.ndarray, float, int))}


def _same(a, b) -> bool:
    a, b = np.asarray(a), np.asarray(b)
    if a.dtype.kind in "fc":
        return a.shape == b.shape and np.array_equal(a, b, equal_nan=True)
    return np.array_equal(a, b)


@pytest.mark.parametrize("task", ["classification", "regression"])
@pytest.mark.parametrize("missing", [False, True])
def test_oob_in_blocks_of_trees_and_predicted_again_equals_one_block(monkeypatch, task, missing):
    X, y = _problem(task, missing)
    forest = fl.Forest(trees=9, sampler=2, rng=5, task=task).fit(X, y)
    whole = _oob_arrays(forest)
    monkeypatch.setattr(_oob, "_PAIRS", 2 * X.shape[0])  # two trees a block (numeric trees)
    monkeypatch.setattr(_oob, "_KEEP_BYTES", 0)            # the second pass predicts again
    blocked = _oob_arrays(forest)
    assert whole.keys() == blocked.keys() and len(whole) > 5
    assert all(_same(whole[k], blocked[k]) for k in whole), [k for k in whole if not _same(whole[k], blocked[k])]


@pytest.mark.parametrize("missing", [False, True])
def test_predictions_in_row_blocks_equal_the_per_tree_table_reduced_at_once(monkeypatch, missing):
    Xc, yc = _problem("classification", missing, seed=1)
    Xr, yr = _problem("regression", missing, seed=2)
    clf = fl.Forest(trees=7, sampler=2, rng=3).fit(Xc, yc)
    reg = fl.Forest(trees=7, sampler=2, rng=3).fit(Xr, yr)
    monkeypatch.setattr(_cases, "PREDICTION_BUDGET", 7 * 13)  # 13 rows a block
    monkeypatch.setattr(_tree, "_BLOCK_ROWS", 17)
    table = clf.per_tree(Xc)
    # reference: every tree's leaves by the general level-wise descent, reduced in one piece
    ref = np.stack([t.value[_leaf_index_general(t, Xc, True)] for t in (clf.tree(b) for b in range(7))])
    assert np.array_equal(table, ref.astype(np.int64))
    shares = _cases.vote_shares(table, clf.classes.size)
    assert np.array_equal(clf.votes(Xc), shares)
    assert np.array_equal(clf.predict(Xc), clf.classes[np.argmax(shares, axis=1)])
    values = reg.per_tree(Xr)
    ref = np.stack([t.value[_leaf_index_general(t, Xr, True)] for t in (reg.tree(b) for b in range(7))])
    assert np.array_equal(values, ref)
    assert np.array_equal(reg.predict(Xr), values.mean(axis=0))


def test_fit_with_narrow_items_gathered_in_small_blocks_grows_the_same_trees(monkeypatch):
    from forestlab.engine import elements as _elements
    from forestlab.engine import segments as _segments

    rng = np.random.default_rng(4)
    X = np.round(rng.normal(size=(2000, 6)), 1)  # ties: the packed 64-bit keys and their int32 items
    y = (X[:, 0] - X[:, 1] + rng.normal(size=2000) > 0).astype(int)
    yr = X[:, 2] + rng.normal(size=2000)

    def trees(target, **kw):
        f = fl.Forest(trees=3, sampler=3, rng=8, **kw).fit(X, target)
        return [[getattr(f.tree(b), k.name) for k in fields(f.tree(b))] for b in range(3)]

    whole = trees(y), trees(y, min_leaf=3), trees(yr)
    monkeypatch.setattr(_segments, "_GATHER_BLOCK", 7)  # the keys' blocks
    monkeypatch.setattr(_elements, "_GATHER_BLOCK", 7)  # the gathers' blocks
    blocked = trees(y), trees(y, min_leaf=3), trees(yr)
    for a, b in zip(whole, blocked):
        assert all(_same(u, v) for ta, tb in zip(a, b) for u, v in zip(ta, tb))
