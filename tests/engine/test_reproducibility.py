"""Reproducibility and the bootstrap: seeds per tree, independence of the engine's batching, in-bag counts.

References: numpy.random's SeedSequence spawning (a child's spawn key extends its parent's) and its
repeatability tests that pin a stream by a sha256 (numpy ``test_generator_mt19937.py``); Breiman (1996),
"Out-of-bag estimation" (technical report, UC Berkeley): about 37% of the cases are left out of each
bootstrap sample, the limit of ``(1 - 1/n)^n`` (exact expectation computed below).
"""

from __future__ import annotations

import hashlib
import math

import numpy as np
import pytest

import forestlab as fl
import forestlab._fitting as forest_module
import forestlab.execution.work as parallel_module

FIELDS = ("feature", "threshold", "left", "right", "value", "cases", "impurity_decrease", "depth")


def small_problem(task="classification", n=60, p=4, seed=12345):
    rng = np.random.default_rng(seed)
    X = np.round(rng.normal(size=(n, p)), 2)  # rounded: tied values occur
    signal = X[:, 0] + X[:, 1] * X[:, 2]
    y = (signal > 0).astype(np.int64) if task == "classification" else signal + 0.3 * rng.normal(size=n)
    return X, y


def assert_same_tree(a, b):
    for name in FIELDS:
        x, y = getattr(a, name), getattr(b, name)
        assert x.dtype == y.dtype and x.shape == y.shape, name
        assert x.tobytes() == y.tobytes(), name  # bit for bit (NaN thresholds included)


def assert_same_forest(a, b):
    assert a.inbag.tobytes() == b.inbag.tobytes()
    assert a.trees == b.trees
    for t in range(a.trees):
        assert_same_tree(a.tree(t), b.tree(t))


def little_endian(arr):
    return np.ascontiguousarray(arr, dtype=arr.dtype.newbyteorder("<")).tobytes()


def tree_digest(tree):
    """sha256 of a tree's arrays; the impurity decrease is rounded to 9 decimals (its last bits depend on
    the order of floating-point sums, which may differ between NumPy builds)."""
    h = hashlib.sha256()
    for name in FIELDS:
        arr = getattr(tree, name)
        h.update(little_endian(np.round(arr, 9) if name == "impurity_decrease" else arr))
    return h.hexdigest()


class TestForestRng:
    """``rng`` normalisation and the per-tree SeedSequence children."""

    def test_rng_iv(self):
        with pytest.raises(ValueError, match=r"`rng` must be non-negative when an int; got -3"):
            fl.Forest(rng=-3)
        with pytest.raises(TypeError, match=r"`rng` must be None, a non-negative int, a numpy SeedSequence or a "
                                            r"numpy Generator; got RandomState"):
            fl.Forest(rng=np.random.RandomState(0))

    def test_same_int_gives_a_bit_identical_forest(self):
        X, y = small_problem()
        assert_same_forest(fl.Forest(trees=12, rng=7).fit(X, y), fl.Forest(trees=12, rng=7).fit(X, y))
        forest = fl.Forest(trees=12, rng=7)
        first = [forest.fit(X, y).tree(t) for t in range(12)]
        again = forest.fit(X, y)  # refitting replaces every tree with the same ones
        for t in range(12):
            assert_same_tree(first[t], again.tree(t))

    def test_different_seeds_differ(self):
        X, y = small_problem()
        a = fl.Forest(trees=5, rng=1).fit(X, y)
        b = fl.Forest(trees=5, rng=2).fit(X, y)
        assert a.inbag.tobytes() != b.inbag.tobytes()

    def test_stream_is_pinned(self):
        # Changing either digest means a deliberate change of the random stream (bootstrap draws, feature
        # draws, or the order in which they are taken) or of the node storage: say so in the change log and
        # update the value. (The tree digest last changed when `cases` and `impurity_decrease` became float32;
        # the in-bag digest, hence the stream, did not change.)
        X, y = small_problem()
        forest = fl.Forest(trees=8, rng=2024).fit(X, y)
        assert hashlib.sha256(little_endian(forest.inbag)).hexdigest() == (
            "566afa698edda11d9f29b1b59da41d590bcbe5ba3d4b267ea9a480832628baf6")
        assert tree_digest(forest.tree(0)) == (
            "85aea22b7ac75f96725e10409c7aaa14cb2d913cbe1d23485016e3e054b4a8cc")

    def test_tree_b_is_grown_from_its_spawned_child(self):
        X, y = small_problem()
        n = X.shape[0]
        root = np.random.SeedSequence(99).spawn(3)[2]  # a root that itself has a spawn key
        forest = fl.Forest(trees=6, rng=root).fit(X, y)
        assert forest.seed.entropy == 99 and forest.seed.spawn_key == (2,)
        children = np.random.SeedSequence(99, spawn_key=(2,)).spawn(6)
        for b in range(6):
            child = np.random.SeedSequence(forest.seed.entropy, spawn_key=forest.seed.spawn_key + (b,))
            assert child.spawn_key == children[b].spawn_key
            np.testing.assert_array_equal(child.generate_state(4), children[b].generate_state(4))
            # The bootstrap is the tree's first draw: n uniform case indices from the child's generator.
            draws = np.random.default_rng(child).integers(0, n, size=n)
            np.testing.assert_array_equal(forest.inbag[b], np.bincount(draws, minlength=n))

    def test_int_seed_sequence_and_generator(self):
        X, y = small_problem()
        by_int = fl.Forest(trees=4, rng=5).fit(X, y)
        assert by_int.seed.entropy == 5
        assert_same_forest(by_int, fl.Forest(trees=4, rng=np.random.SeedSequence(5)).fit(X, y))
        a = fl.Forest(trees=4, rng=np.random.default_rng(8)).fit(X, y)
        b = fl.Forest(trees=4, rng=np.random.default_rng(8)).fit(X, y)
        assert_same_forest(a, b)
        gen = np.random.default_rng(8)
        first = fl.Forest(trees=4, rng=gen).fit(X, y)
        second = fl.Forest(trees=4, rng=gen).fit(X, y)  # the generator was advanced
        assert first.inbag.tobytes() != second.inbag.tobytes()
        assert fl.Forest(trees=4).fit(X, y).inbag.tobytes() != fl.Forest(trees=4).fit(X, y).inbag.tobytes()


class TestRegrow:
    """``regrow(b)`` grows tree b alone from its seed."""

    def test_regrow_iv(self):
        X, y = small_problem()
        forest = fl.Forest(trees=3, rng=0).fit(X, y)
        with pytest.raises(IndexError, match=r"`b` = 3 is out of range for a forest of 3 trees"):
            forest.regrow(3)
        with pytest.raises(RuntimeError, match=r"not fitted yet"):
            fl.Forest().regrow(0)

    @pytest.mark.parametrize("task", ["classification", "regression"])
    def test_regrow_equals_tree(self, task):
        X, y = small_problem(task)
        forest = fl.Forest(trees=10, rng=3).fit(X, y)
        for b in (0, 4, 9, -1):
            assert_same_tree(forest.regrow(b), forest.tree(b))


class TestBatching:
    """The forest does not depend on how many trees the engine grows together (STYLE 24)."""

    @pytest.mark.parametrize("task, sampler", [
        ("classification", None), ("regression", None), ("classification", fl.TreeSubspace(2)),
        ("regression", fl.AllFeatures()),
    ])
    def test_batch_sizes_1_3_40_64_give_the_same_forest(self, monkeypatch, task, sampler):
        X, y = small_problem(task, n=50)
        batches = []
        original = parallel_module.grow_batch

        def spy(data, rules, seeds, work=None):
            batches.append(len(seeds))
            return original(data, rules, seeds, work)

        monkeypatch.setattr(parallel_module, "grow_batch", spy)
        monkeypatch.setattr(forest_module, "BATCH_ITEMS", 10**9)
        forests = {}
        # 70 = 64 + 6: a last block under a quarter batch is spread over the others (plan_blocks)
        expected = {1: [1] * 70, 3: [3] * 23 + [1], 40: [40, 30], 64: [70]}
        for size in (1, 3, 40, 64):
            monkeypatch.setattr(forest_module, "MAX_BATCH", size)
            batches.clear()
            forests[size] = fl.Forest(trees=70, sampler=sampler, rng=17).fit(X, y)
            assert batches == expected[size]
        for size in (3, 40, 64):
            assert_same_forest(forests[1], forests[size])


class TestInbag:
    """The in-bag counts: read-only uint8 (trees, n), summing to the sample size of every tree."""

    def test_inbag_iv(self):
        X, y = small_problem()
        forest = fl.Forest(trees=3, rng=0).fit(X, y)
        with pytest.raises(ValueError, match="read-only"):
            forest.inbag[0, 0] = 9
        with pytest.raises(ValueError, match=r"`sample_size` = 61 exceeds the 60 cases available without "
                                             r"replacement"):
            fl.Forest(trees=2, sample_size=61, replace=False).fit(X, y)

    def test_bootstrap_counts(self):
        X, y = small_problem()
        forest = fl.Forest(trees=9, rng=1).fit(X, y)
        assert forest.inbag.dtype == np.uint8 and forest.inbag.shape == (9, 60)
        assert not forest.inbag.flags.writeable
        np.testing.assert_array_equal(forest.inbag.sum(axis=1), 60)
        assert forest.inbag.max() > 1  # with replacement some case is drawn twice
        for b in range(9):
            assert forest.tree(b).cases[0] == 60

    @pytest.mark.parametrize("size, expected", [(25, 25), (0.5, 30), (0.99, 59), (1.0, 60)])
    def test_sample_size_int_and_fraction(self, size, expected):
        X, y = small_problem()
        forest = fl.Forest(trees=4, sample_size=size, rng=2).fit(X, y)
        assert forest.sample_size == expected
        np.testing.assert_array_equal(forest.inbag.sum(axis=1), expected)

    def test_without_replacement_counts_are_zero_or_one(self):
        X, y = small_problem()
        forest = fl.Forest(trees=6, sample_size=0.5, replace=False, rng=2).fit(X, y)
        assert set(np.unique(forest.inbag).tolist()) == {0, 1}
        np.testing.assert_array_equal(forest.inbag.sum(axis=1), 30)
        whole = fl.Forest(trees=2, sample_size=60, replace=False, rng=2).fit(X, y)
        np.testing.assert_array_equal(whole.inbag, 1)

    def test_out_of_bag_share_is_about_one_over_e(self):
        # Breiman (1996), "Out-of-bag estimation": about 37% of cases are out of each bootstrap sample;
        # exactly E = (1 - 1/n)^n per case, -> 1/e. Z_b = cases left out of tree b has
        # Var Z = n q (1 - q) + n (n - 1) ((1 - 2/n)^n - q^2), q = (1 - 1/n)^n; trees are independent.
        n, trees = 1000, 200
        X = np.arange(n, dtype=float)[:, None]
        forest = fl.Forest(trees=trees, depth_limit=0, rng=31).fit(X, (np.arange(n) % 2).astype(int))
        share = np.mean(forest.inbag == 0)
        q = (1 - 1 / n) ** n
        var_z = n * q * (1 - q) + n * (n - 1) * ((1 - 2 / n) ** n - q * q)
        se = math.sqrt(var_z / trees) / n
        assert abs(share - q) < 4 * se, (share, q, se)
        assert abs(share - math.exp(-1)) < 4 * se + abs(q - math.exp(-1))
        assert 0.36 < share < 0.38
