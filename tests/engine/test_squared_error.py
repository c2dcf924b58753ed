"""The squared-error search scores a level in pieces of whole segments (``squared_error._SCORE_RUN``
elements at a time): the pieces must change nothing, so forests grown with pieces of a few elements (every
segment a piece of its own, segments longer than a piece, the short-segment gather and both ways of
checking ``min_leaf``, levels with and without ties) equal those grown with the default pieces bit for bit,
with and without case weights.
"""

from __future__ import annotations

import numpy as np
import pytest

import forestlab as fl
from forestlab.engine import squared_error


def _forest(X, y, weights, min_leaf):
    return fl.Forest(trees=3, sampler=2, min_leaf=min_leaf, task="regression", rng=5).fit(X, y, weights)


@pytest.mark.parametrize("run", [1, 7, 200])
@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("min_leaf", [1, 4])
@pytest.mark.parametrize("ties", [False, True])
def test_scores_in_pieces_grow_the_same_trees(monkeypatch, run, weighted, min_leaf, ties):
    rng = np.random.default_rng(11)
    X = rng.normal(size=(600, 4))
    X = np.round(X, 1) if ties else X
    y = np.sin(3 * X[:, 0]) + X[:, 1] * X[:, 2] + 0.3 * rng.normal(size=600) + 50.0
    weights = rng.uniform(0.2, 3.0, size=600) if weighted else None
    whole = _forest(X, y, weights, min_leaf)
    monkeypatch.setattr(squared_error, "_SCORE_RUN", run)
    pieces = _forest(X, y, weights, min_leaf)
    assert whole.tree(0).feature.size > 20  # deep trees: short segments on their last levels
    for i in range(whole.trees):
        a, b = whole.tree(i), pieces.tree(i)
        for name in ("feature", "threshold", "value", "cases", "impurity_decrease"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
