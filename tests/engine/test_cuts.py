"""The pick compares every element with its node's tie bar in pieces of whole nodes (``cuts._PICK_RUN``
elements at a time, a node alone in its piece against its bar as a number): the comparison must equal the
bars spread over every node's elements, element by element, and forests grown with pieces of a few elements
must equal those grown with the default pieces bit for bit (two classes, scored at every element or at the
class changes only, and squared error).
"""

from __future__ import annotations

import numpy as np
import pytest

import forestlab as fl
from forestlab.engine import cuts


@pytest.mark.parametrize("run", [1, 3, 50, 1 << 20])
def test_bars_compared_in_pieces_equal_an_element_by_element_comparison(monkeypatch, run):
    monkeypatch.setattr(cuts, "_PICK_RUN", run)
    rng = np.random.default_rng(3)
    for _ in range(30):
        K = int(rng.integers(1, 12))
        counts = rng.integers(0, 9, size=K)  # (nodes without elements: the pick at class changes only)
        counts[0] = max(counts[0], 1)
        size = int(counts.sum())
        node_start = np.cumsum(counts) - counts
        score = rng.choice([-np.inf, 0.0, 0.5, 1.0], size=size)
        bar = rng.choice([np.inf, 0.0, 0.5, 1.0], size=K)
        expected = np.zeros(size, dtype=bool)
        for k in range(K):  # brute force: every element of every node against that node's bar
            for e in range(node_start[k], node_start[k] + counts[k]):
                expected[e] = score[e] >= bar[k]
        out = np.empty(size, dtype=bool)
        got = cuts._reaching(score, bar, node_start, counts, out)
        np.testing.assert_array_equal(got, expected)


@pytest.mark.parametrize("task", ["classification", "regression"])
@pytest.mark.parametrize("min_leaf", [1, 4])
@pytest.mark.parametrize("ties", [False, True])
def test_picks_in_pieces_grow_the_same_trees(monkeypatch, task, min_leaf, ties):
    rng = np.random.default_rng(8)
    X = rng.normal(size=(700, 5))
    X = np.round(X, 1) if ties else X
    signal = np.sin(3 * X[:, 0]) + X[:, 1] * X[:, 2] + 0.3 * rng.normal(size=700)
    y = (signal > 0).astype(np.int64) if task == "classification" else signal + 20.0

    def forest():
        return fl.Forest(trees=3, sampler=2, min_leaf=min_leaf, task=task, rng=2).fit(X, y)

    whole = forest()
    for run in (1, 13):
        monkeypatch.setattr(cuts, "_PICK_RUN", run)
        pieces = forest()
        assert whole.tree(0).feature.size > 20
        for i in range(whole.trees):
            a, b = whole.tree(i), pieces.tree(i)
            for name in ("feature", "threshold", "value", "cases", "impurity_decrease"):
                np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
