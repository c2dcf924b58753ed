"""Permutation and impurity importance (forestlab.analyses.importance)."""

from __future__ import annotations

import numpy as np
import pytest

import forestlab as fl
from forestlab.engine.seeding import root_seed, tree_generator
from forestlab.engine.tree import leaf_index
from forestlab.synthetic import friedman1


@pytest.fixture(scope="module")
def friedman_forest():
    X, y = friedman1(500, rng=1)
    return fl.Forest(trees=200, rng=2).fit(X, y)


@pytest.fixture(scope="module")
def small_classifier():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(120, 4))
    y = np.where(X[:, 0] - X[:, 1] > 0, "a", "b")
    return fl.Forest(trees=25, rng=4).fit(X, y), X, y


class TestImportanceValidation:
    def test_messages(self, small_classifier):
        forest, X, y = small_classifier
        with pytest.raises(ValueError, match=r"`kind` must be one of \['impurity', 'permutation'\]"):
            forest.importance("gain")
        with pytest.raises(ValueError, match="`names` must name all 4 features; got 3"):
            forest.importance(names=["a", "b", "c"])
        with pytest.raises(ValueError, match="`names` must be distinct"):
            forest.importance(names=["a", "a", "b", "c"])
        with pytest.raises(ValueError, match="pass both `X` and `y`"):
            forest.importance(X=X)
        with pytest.raises(ValueError, match="only used by kind='permutation'"):
            forest.importance("impurity", X=X, y=y)
        with pytest.raises(ValueError, match=r"`groups` columns must be feature names or ints in \[0, 4\)"):
            forest.importance(groups=[[0, 9]])
        with pytest.raises(ValueError, match="unknown feature 'zz'"):
            forest.importance(groups={"g": ["zz"]})
        with pytest.raises(ValueError, match="distinct columns"):
            forest.importance(groups=[[1, 1]])
        with pytest.raises(TypeError, match="`groups` must be a mapping"):
            forest.importance(groups=3)
        with pytest.raises(ValueError, match="`y` holds label"):
            forest.importance(X=X, y=np.where(y == "a", "a", "c"))
        with pytest.raises(RuntimeError, match="not fitted"):
            fl.Forest(trees=3).importance()


class TestPermutationImportance:
    def test_friedman1_active_inputs_rank_first(self, friedman_forest):
        # Friedman (1991), "Multivariate adaptive regression splines", Ann. Statist. 19: y uses x1..x5 only
        # (columns 0..4); x6..x10 are pure noise.
        result = friedman_forest.importance(rng=5)
        assert set(result.ranking[:5].tolist()) == {0, 1, 2, 3, 4}
        active, noise = result.z[:5], result.z[5:]
        assert active.min() > 10
        assert active.min() > 3 * np.abs(noise).max()
        assert result.trees == 200 and result.per_tree.shape == (200, 10)

    def test_equals_per_tree_reference(self, small_classifier):
        # Two routes: the stacked, vectorised shuffle == one tree, one feature, one shuffled copy at a time.
        forest, X, y = small_classifier
        result = forest.importance(rng=9)
        codes = np.searchsorted(forest.classes, y)
        root = root_seed(9)
        for b in range(forest.trees):
            tree = forest.tree(b)
            rows = np.flatnonzero(forest.inbag[b] == 0)
            generator = tree_generator(root, b)
            base = np.mean(tree.value[leaf_index(tree, X[rows])] != codes[rows])
            for j in range(X.shape[1]):
                shuffled = X[rows].copy()
                shuffled[:, j] = X[rows][generator.permutation(rows.size), j]
                rise = np.mean(tree.value[leaf_index(tree, shuffled)] != codes[rows]) - base
                assert result.per_tree[b, j] == pytest.approx(rise, abs=1e-15)
        assert np.allclose(result.scores, result.per_tree.mean(axis=0))
        assert np.allclose(result.spread, result.per_tree.std(axis=0, ddof=1))

    def test_seeded(self, small_classifier):
        forest, _, _ = small_classifier
        a, b, c = forest.importance(rng=1), forest.importance(rng=1), forest.importance(rng=2)
        assert np.array_equal(a.per_tree, b.per_tree)
        assert not np.array_equal(a.per_tree, c.per_tree)

    def test_one_column_groups_equal_features(self, small_classifier):
        forest, _, _ = small_classifier
        alone = forest.importance(rng=3)
        grouped = forest.importance(groups=[[0], [1], [2], [3]], rng=3)
        assert np.array_equal(alone.per_tree, grouped.per_tree)
        assert grouped.names == ("x0", "x1", "x2", "x3")

    def test_group_of_copies_matters_more_than_each_copy(self):
        # Common practice: two copies of a predictor share its importance; shuffled together they lose it all.
        rng = np.random.default_rng(8)
        x = rng.normal(size=400)
        X = np.column_stack([x, x, rng.normal(size=400)])
        y = np.where(x + 0.3 * rng.normal(size=400) > 0, 1, 0)
        forest = fl.Forest(trees=100, rng=1).fit(X, y)
        result = forest.importance(groups={"copy0": [0], "copy1": [1], "both": [0, 1]}, rng=2)
        both = result.scores[2]
        assert both > 1.5 * max(result.scores[0], result.scores[1])

    def test_held_out_cases(self, friedman_forest):
        X, y = friedman1(300, rng=77)
        result = friedman_forest.importance(X=X, y=y, rng=3)
        assert set(result.ranking[:5].tolist()) == {0, 1, 2, 3, 4}
        assert "OOB" not in result.measure

    def test_table_is_sorted(self, friedman_forest):
        result = friedman_forest.importance(rng=5, names=[f"in{j}" for j in range(10)])
        lines = str(result).splitlines()
        assert lines[0].startswith("permutation importance")
        body = lines[3:]
        assert len(body) == 10
        shown = [line.split()[1] for line in body]
        assert shown == [result.names[k] for k in result.ranking]
        assert repr(result) == str(result)


class TestImpurityImportance:
    def test_shares(self, friedman_forest):
        result = friedman_forest.importance("impurity")
        assert result.scores.sum() == pytest.approx(1.0)
        assert np.allclose(result.per_tree.sum(axis=1), 1.0)
        assert np.isnan(result.z).all()
        assert set(result.ranking[:5].tolist()) == {0, 1, 2, 3, 4}

    def test_favours_many_values_while_permutation_does_not(self):
        # Strobl, Boulesteix, Zeileis & Hothorn (2007), "Bias in random forest variable importance measures",
        # BMC Bioinformatics 8:25 (qualitative): the impurity measure prefers a noise predictor with many
        # distinct values to a binary noise predictor; permutation importance treats them alike.
        rng = np.random.default_rng(5)
        n = 600
        signal = rng.normal(size=n)
        X = np.column_stack([signal, rng.normal(size=n), rng.integers(0, 2, n).astype(float)])
        y = np.where(signal + rng.normal(size=n) > 0, 1, 0)
        forest = fl.Forest(trees=200, rng=1).fit(X, y)
        impurity = forest.importance("impurity").scores
        permutation = forest.importance(rng=2).scores
        assert impurity[1] > 10 * impurity[2]          # measured: 0.295 vs 0.006
        assert permutation[1] < permutation[2] + 0.05 * permutation[0]
        assert abs(permutation[1]) < 0.1 * permutation[0] and abs(permutation[2]) < 0.1 * permutation[0]
