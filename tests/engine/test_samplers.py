"""Candidate-feature samplers: sizes, the masks the engine really uses, the subspace method, user samplers.

References: random forest with ``m`` candidates per split and ``m = int(log2 p + 1)`` (Breiman 2001, "Random
forests", Machine Learning 45:5-32, section 5); defaults ``floor(sqrt p)`` for classification and
``max(1, floor(p/3))`` for regression (common practice); one subset per tree (Ho 1998, "The random subspace
method for constructing decision forests", IEEE TPAMI 20(8):832-844).
"""

from __future__ import annotations

import contextlib
import math

import numpy as np
import pytest

import forestlab as fl
import forestlab.engine.grow as grow
from example_samplers import FirstPlusOne


@pytest.fixture
def recorded_masks(monkeypatch):
    """Every candidate mask the engine draws during a fit, in order (one per draw of all trees of a batch)."""
    masks = []
    original = grow.draw_masks

    def spy(sampler, gens, nodes, features):
        mask = original(sampler, gens, nodes, features)
        masks.append(mask.copy())
        return mask

    monkeypatch.setattr(grow, "draw_masks", spy)
    return masks


def problem(p, n=120, task="classification", seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    signal = X[:, : min(p, 3)].sum(axis=1)
    y = (signal > 0).astype(int) if task == "classification" else signal + rng.normal(size=n)
    return X, y


def split_features(tree):
    return set(tree.feature[tree.feature >= 0].tolist())


class TestCandidateSampler:
    """The abstract base and user subclasses."""

    def test_candidate_sampler_iv(self):
        class WrongShape(fl.CandidateSampler):
            def draw(self, rng, nodes, features):
                return np.ones((nodes, features + 1), dtype=bool)

        class WrongDtype(fl.CandidateSampler):
            def draw(self, rng, nodes, features):
                return np.ones((nodes, features), dtype=np.int64)

        class NotAnArray(fl.CandidateSampler):
            def draw(self, rng, nodes, features):
                return [[True] * features] * nodes

        class PerTreeRows(fl.CandidateSampler):
            per_tree = True

            def draw(self, rng, nodes, features):
                return np.ones((2, features), dtype=bool)

        X, y = problem(3)
        cases = [
            (WrongShape, r"WrongShape.draw\(rng, 1, 3\) must return a bool array of shape \(1, 3\); "
                         r"got bool array of shape \(1, 4\)"),
            (WrongDtype, r"WrongDtype.draw\(rng, 1, 3\) must return a bool array of shape \(1, 3\); "
                         r"got int64 array of shape \(1, 3\)"),
            (NotAnArray, r"NotAnArray.draw\(rng, 1, 3\) must return a bool array .*; got list"),
            (PerTreeRows, r"PerTreeRows.draw\(rng, 1, 3\) must return a bool array of shape \(1, 3\); "
                          r"got bool array of shape \(2, 3\)"),
        ]
        for cls, match in cases:
            with pytest.raises(ValueError, match=match):
                fl.Forest(trees=2, sampler=cls(), rng=0).fit(X, y)

    def test_draw_is_abstract(self):
        class NoDraw(fl.CandidateSampler):
            pass

        with pytest.raises(TypeError, match="abstract"):
            NoDraw()

    def test_user_sampler_offering_one_feature(self, recorded_masks):
        class OnlyFeature2(fl.CandidateSampler):
            def draw(self, rng, nodes, features):
                mask = np.zeros((nodes, features), dtype=bool)
                mask[:, 2] = True
                return mask

        X, y = problem(4)
        forest = fl.Forest(trees=5, sampler=OnlyFeature2(), rng=0).fit(X, y)
        for b in range(5):
            assert split_features(forest.tree(b)) == {2}  # x2 is continuous: never constant in a node
        assert all(m.sum(axis=1).tolist() == [1] * m.shape[0] for m in recorded_masks)
        assert forest.sampler == OnlyFeature2()

    def test_docstring_sampler_draws_from_the_given_generator(self):
        X, y = problem(6)
        a = fl.Forest(trees=4, sampler=FirstPlusOne(), rng=3).fit(X, y)
        b = fl.Forest(trees=4, sampler=FirstPlusOne(), rng=3).fit(X, y)
        for t in range(4):
            np.testing.assert_array_equal(a.tree(t).feature, b.tree(t).feature)

    def test_fallback_when_all_candidates_are_constant(self):
        # x0 is 0/1 and separates the classes only partly; inside each x0-child x0 is constant and x1
        # decides. A per-node sampler offering only x0 must fall back to x1 there (documented rule); a
        # per-tree sampler's mask is final, so its tree stops after the x0 split.
        rng = np.random.default_rng(1)
        x0 = np.repeat([0.0, 1.0], 50)
        x1 = rng.normal(size=100)
        y = np.where(x0 == 0, x1 > 0.3, x1 > -0.3).astype(int)
        X = np.column_stack([x0, x1])

        class OnlyFirst(fl.CandidateSampler):
            def draw(self, rng, nodes, features):
                mask = np.zeros((nodes, features), dtype=bool)
                mask[:, 0] = True
                return mask

        class OnlyFirstPerTree(OnlyFirst):
            per_tree = True

        whole = {"sample_size": 100, "replace": False}
        node = fl.Forest(trees=1, sampler=OnlyFirst(), rng=0, **whole).fit(X, y).tree(0)
        assert node.feature[0] == 0
        assert split_features(node) == {0, 1}
        assert np.all(node.feature[node.depth >= 1][node.feature[node.depth >= 1] >= 0] == 1)
        forest = fl.Forest(trees=1, sampler=OnlyFirst(), rng=0, **whole).fit(X, y)
        np.testing.assert_array_equal(forest.predict(X), y)  # grown to purity through the fallback
        per_tree = fl.Forest(trees=1, sampler=OnlyFirstPerTree(), rng=0, **whole).fit(X, y).tree(0)
        assert per_tree.nodes == 3 and per_tree.feature[0] == 0


class TestAllFeatures:
    """Plain bagging (Breiman 1996, "Bagging predictors"): every feature at every node."""

    def test_all_features_iv(self):
        with pytest.raises(TypeError, match=r"`sampler` must be a sampler instance such as AllFeatures\(\); "
                                            r"got the class"):
            fl.Forest(sampler=fl.AllFeatures)

    def test_every_mask_is_full(self, recorded_masks):
        X, y = problem(5)
        forest = fl.Forest(trees=3, sampler=fl.AllFeatures(), rng=0).fit(X, y)
        assert forest.sampler == fl.AllFeatures()
        assert recorded_masks and all(m.all() for m in recorded_masks)


class TestRandomSubset:
    """A fresh subset of m features at every node (Breiman 2001)."""

    @pytest.mark.parametrize("m, error, match", [
        ("cube", ValueError, r"`m` must be one of \['log2', 'sqrt'\], an int or a fraction; got 'cube'"),
        (0, ValueError, r"`m` must be at least 1 when an int; got 0"),
        (-2, ValueError, r"`m` must be at least 1 when an int; got -2"),
        (1.5, ValueError, r"`m` must lie in \(0, 1\] when a fraction; got 1.5"),
        (0.0, ValueError, r"`m` must lie in \(0, 1\] when a fraction; got 0.0"),
        (True, TypeError, r"`m` must be an int, a float fraction, 'sqrt' or 'log2'; got a bool"),
        ([3], TypeError, r"`m` must be an int, a float fraction, 'sqrt' or 'log2'; got list"),
    ])
    def test_random_subset_iv(self, m, error, match):
        with pytest.raises(error, match=match):
            fl.RandomSubset(m)
        with pytest.raises(error, match=match):
            fl.TreeSubspace(m)

    @pytest.mark.parametrize("spec, p, task, expected", [
        (3, 10, "classification", 3),
        (50, 10, "classification", 10),            # an int is capped at p
        (0.3, 10, "classification", 3),            # max(1, floor(f p))
        (0.01, 10, "regression", 1),
        ("sqrt", 20, "regression", 4),             # floor(sqrt(20))
        ("log2", 60, "classification", 6),         # int(log2 60 + 1) = int(6.907), Breiman 2001 sec. 5
        ("log2", 8, "classification", 4),          # int(log2 8 + 1) = 4
        ("log2", 9, "regression", 4),
        (None, 20, "classification", 4),           # floor(sqrt p), common practice
        (None, 20, "regression", 6),               # max(1, floor(p/3)), common practice
        (None, 2, "regression", 1),
        (None, 60, "classification", 7),
    ])
    def test_resolved_m_and_masks_of_the_fit(self, recorded_masks, spec, p, task, expected):
        X, y = problem(p, n=60, task=task)
        capped = isinstance(spec, int) and spec > p   # said with a warning (tests/forest/test_surprises.py)
        with pytest.warns(fl.CandidatesCappedWarning) if capped else contextlib.nullcontext():
            forest = fl.Forest(trees=3, sampler=fl.RandomSubset(spec), rng=0).fit(X, y)
        assert forest.sampler == fl.RandomSubset(expected)
        assert forest.sampler.m == expected
        assert recorded_masks
        for mask in recorded_masks:
            np.testing.assert_array_equal(mask.sum(axis=1), expected)

    def test_default_sampler_is_common_practice(self):
        X, y = problem(20, n=60)
        assert fl.Forest(trees=2, rng=0).fit(X, y).sampler.m == math.isqrt(20)
        X, y = problem(20, n=60, task="regression")
        assert fl.Forest(trees=2, rng=0).fit(X, y).sampler.m == 20 // 3

    def test_shorthands_equal_the_instance(self):
        X, y = problem(9, n=60)
        for spec in (2, 0.5, "sqrt", "log2"):
            a = fl.Forest(trees=3, sampler=spec, rng=4).fit(X, y)
            b = fl.Forest(trees=3, sampler=fl.RandomSubset(spec), rng=4).fit(X, y)
            assert a.sampler == b.sampler
            np.testing.assert_array_equal(a.tree(2).feature, b.tree(2).feature)

    def test_draws_are_uniform_over_features(self):
        # Each feature is offered with probability m/p; binomial tolerance on 20000 rows.
        rng = np.random.default_rng(11)
        mask = fl.RandomSubset(3).draw(rng, 20000, 8)
        np.testing.assert_array_equal(mask.sum(axis=1), 3)
        share = mask.mean(axis=0)
        sd = math.sqrt(3 / 8 * 5 / 8 / 20000)
        assert np.all(np.abs(share - 3 / 8) < 5 * sd)

    def test_nodes_draw_different_subsets(self, recorded_masks):
        X, y = problem(10, n=200)
        fl.Forest(trees=1, sampler=fl.RandomSubset(3), rng=0).fit(X, y)
        rows = np.concatenate(recorded_masks)
        assert len({r.tobytes() for r in rows}) > rows.shape[0] // 3


class TestTreeSubspace:
    """One subset of m features per tree (Ho 1998)."""

    def test_tree_subspace_iv(self):
        with pytest.raises(TypeError, match=r"`sampler` must be a sampler instance such as TreeSubspace\(\)"):
            fl.Forest(sampler=fl.TreeSubspace)
        with pytest.raises(ValueError, match=r"`m` must be at least 1 when an int"):
            fl.TreeSubspace(0)

    def test_each_tree_splits_within_its_own_subset(self, recorded_masks):
        X, y = problem(10, n=150)
        forest = fl.Forest(trees=20, sampler=fl.TreeSubspace(4), rng=0).fit(X, y)
        assert forest.sampler == fl.TreeSubspace(4)
        drawn = np.concatenate(recorded_masks)
        assert drawn.shape == (20, 10)  # one row per tree, none per node
        subsets = []
        for b, row in enumerate(drawn):
            assert row.sum() == 4
            allowed = set(np.flatnonzero(row).tolist())
            used = split_features(forest.tree(b))
            assert used <= allowed
            subsets.append(frozenset(allowed))
        assert len(set(subsets)) >= 15  # C(10, 4) = 210 subsets: trees differ

    def test_default_is_half_the_features(self):
        X, y = problem(10, n=60)
        assert fl.Forest(trees=2, sampler=fl.TreeSubspace(), rng=0).fit(X, y).sampler.m == 5
        assert fl.Forest(trees=2, sampler=fl.TreeSubspace("sqrt"), rng=0).fit(X, y).sampler.m == 3


def test_batched_draws_equal_one_draw_per_tree():
    # the engine draws the masks of all trees of a batch together; each tree's rows must be what its own
    # generator gives for one `draw` call (the numpy.random convention: a generator's stream is its own)
    from forestlab.engine.sampler import draw_masks

    for sampler in (fl.RandomSubset(3), fl.RandomSubset(10), fl.AllFeatures(), fl.TreeSubspace(4)):
        nodes = np.array([3, 0, 5, 1])
        together = draw_masks(sampler, [np.random.default_rng(s) for s in range(4)], nodes, 10)
        alone = np.concatenate([sampler.draw(np.random.default_rng(s), int(k), 10) for s, k in enumerate(nodes)])
        np.testing.assert_array_equal(together, alone)


def test_keys_drawn_ahead_equal_one_draw_per_tree_and_level():
    # the engine's TreeGenerators draw RandomSubset's keys a chunk at a time ahead of the levels; every
    # level's masks must be those of one `draw` call per tree and level on plain generators (first rows of
    # 32, then doubling: these node counts cross several chunk ends, some trees idle on some levels)
    from forestlab.engine.sampler import TreeGenerators, draw_masks

    levels = [np.array(k) for k in ([1, 1, 1], [2, 2, 0], [4, 3, 0], [8, 0, 0], [16, 5, 0], [31, 9, 0],
                                     [64, 1, 0], [3, 40, 0], [0, 2, 0])]
    for sampler in (fl.RandomSubset(3), fl.RandomSubset(1), fl.RandomSubset(9)):
        ahead = TreeGenerators(np.random.default_rng(s) for s in (7, 8, 9))
        plain = [np.random.default_rng(s) for s in (7, 8, 9)]
        for nodes in levels:
            got = draw_masks(sampler, ahead, nodes, 10)
            want = np.concatenate([sampler.draw(plain[t], int(k), 10) for t, k in enumerate(nodes)])
            np.testing.assert_array_equal(got, want)
        # many levels: the same keys, and the array holds about twice a level's rows, not every level's
        ahead = TreeGenerators(np.random.default_rng(s) for s in (7, 8))
        plain = [np.random.default_rng(s) for s in (7, 8)]
        for level in range(40):
            nodes = np.array([20, 20 - level % 3])
            got = draw_masks(sampler, ahead, nodes, 10)
            want = np.concatenate([sampler.draw(plain[t], int(k), 10) for t, k in enumerate(nodes)])
            np.testing.assert_array_equal(got, want)
        assert ahead._keys.shape[1] <= 64
        one = TreeGenerators([np.random.default_rng(7)])
        alone = np.random.default_rng(7)
        for k in (1, 2, 40, 3, 100):
            np.testing.assert_array_equal(draw_masks(sampler, one, np.array([k]), 10), sampler.draw(alone, k, 10))
