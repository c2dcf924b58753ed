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


@pytest.mark.parametrize("min_leaf", [2, 2.5, 5])
@pytest.mark.parametrize("ends_run", [0, 1 << 40])
def test_light_cuts_from_the_products_grow_the_same_trees(monkeypatch, min_leaf, ends_run):
    """Without case weights, the light cuts of short segments come from ``W_l * W_r`` against a bar per
    segment (``squared_error._light_bars``); found that way on every level (a huge ``_ENDS_RUN``, no
    ``_GATE_LEVEL``) or never (``_ENDS_RUN = 0``), the trees equal those of the default (on levels this small:
    the mask of every element) bit for bit, also for a ``min_leaf`` that is no whole number (2.5: nodes of
    weight 5 have no valid cut at all)."""
    rng = np.random.default_rng(3)
    X = rng.normal(size=(500, 3))
    y = X[:, 0] - 2.0 * (X[:, 1] > 0.3) + 0.5 * rng.normal(size=500)
    reference = _forest(X, y, None, min_leaf)
    monkeypatch.setattr(squared_error, "_ENDS_RUN", ends_run)
    monkeypatch.setattr(squared_error, "_GATE_LEVEL", 0)  # (levels of this data hold fewer elements)
    other = _forest(X, y, None, min_leaf)
    assert reference.tree(0).feature.size > 20
    for i in range(reference.trees):
        a, b = reference.tree(i), other.tree(i)
        for name in ("feature", "threshold", "value", "cases", "impurity_decrease"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)


@pytest.mark.parametrize("weight", [5.0, 6.0, 9.0, 10.0])
def test_light_bars_mark_exactly_the_light_cuts(weight):
    """Brute force: for every left weight ``W_l`` of a segment of weight ``W``, the bar marks the cut light
    exactly when a side holds less than ``min_leaf``."""
    for min_leaf in (1.5, 2.0, 2.5, 3.0, 4.2, 5.0):
        bar = squared_error._light_bars(np.array([weight]), min_leaf)[0]
        for left in np.arange(0.0, weight + 1.0):
            light = min(left, weight - left) < min_leaf
            assert (left * (weight - left) < bar) == light, (weight, min_leaf, left)


@pytest.mark.parametrize("whole", [True, False])
def test_light_near_ends_finds_every_light_cut(whole):
    """Brute force over random segments (1-40 elements, whole or fractional weights of at least
    ``lightest``): the elements ``_light_near_ends`` returns are exactly those whose cut leaves less than
    ``min_leaf`` on a side (the segment's last element included)."""
    rng = np.random.default_rng(8)
    size = rng.integers(1, 41, size=60)
    start = np.cumsum(size) - size
    w = rng.integers(1, 4, size=size.sum()).astype(float) if whole else rng.uniform(0.5, 3.0, size=size.sum())
    lightest = float(w.min())
    left = np.concatenate([np.cumsum(w[a:a + k]) for a, k in zip(start, size)])
    weight = np.add.reduceat(w, start)
    seg = type("Seg", (), {"start": start, "size": size})()
    for min_leaf in (1.0, 2.0, 2.5, 4.0, 7.0):
        reach = int(np.ceil(min_leaf / lightest))
        found = set(squared_error._light_near_ends(seg, left, weight, min_leaf, reach).tolist())
        total = np.repeat(weight, size)
        expected = set(np.flatnonzero(np.minimum(left, total - left) < min_leaf).tolist())
        assert found == expected, min_leaf


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("trees", [1, 4])
@pytest.mark.parametrize("block", [7, 1 << 16])
def test_node_sums_without_the_moments_column_grow_the_same_trees(monkeypatch, weighted, trees, block):
    # a batch of more than MOMENTS_COLUMN_ENTRIES entries forms each item's target and square when its node
    # sums need them, instead of holding them as a column, a block of items at a time (and sums the root's
    # weights a block at a time): the same values added in the same order, so the same trees bit for bit
    monkeypatch.setattr(squared_error, "_MOMENT_BLOCK", block)
    from forestlab.engine import fast_search

    rng = np.random.default_rng(12)
    X = rng.normal(size=(500, 4))
    y = np.sin(3 * X[:, 0]) + X[:, 1] * X[:, 2] + 0.3 * rng.normal(size=500) + 50.0
    weights = rng.uniform(0.2, 3.0, size=500) if weighted else None

    summaries = fast_search.FastPath.summaries

    def fit():  # the forest, and every level's node totals (weight, target sum, sum of squares)
        totals = []

        def recorded(self, *args):
            out = summaries(self, *args)
            totals.append(out[1].copy())
            return out

        monkeypatch.setattr(fast_search.FastPath, "summaries", recorded)
        return fl.Forest(trees=trees, sampler=2, task="regression", rng=6).fit(X, y, weights), totals

    held, held_totals = fit()
    monkeypatch.setattr(fast_search, "MOMENTS_COLUMN_ENTRIES", 0)
    formed, formed_totals = fit()
    assert len(held_totals) == len(formed_totals) > 5
    for a, b in zip(held_totals, formed_totals):
        assert a.tobytes() == b.tobytes()
    for i in range(trees):
        a, b = held.tree(i), formed.tree(i)
        for name in ("feature", "threshold", "value", "cases", "impurity_decrease"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
