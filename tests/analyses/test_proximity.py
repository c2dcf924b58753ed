"""Proximity, outlyingness and the proximity map (forestlab.analyses.proximity)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.spatial.distance

import forestlab as fl
from forestlab.analyses import proximity as _proximity
from forestlab.engine.tree import leaf_index


@pytest.fixture(scope="module")
def small():
    rng = np.random.default_rng(11)
    X = rng.normal(size=(60, 3))
    y = np.where(X[:, 0] + X[:, 2] > 0, 1, 0)
    return fl.Forest(trees=100, rng=12).fit(X, y), X, y


def slow_proximity(forest, X, oob):
    """Reference: one tree at a time, every pair of cases compared directly."""
    n = X.shape[0]
    together, counted = np.zeros((n, n)), np.zeros((n, n))
    for b in range(forest.trees):
        leaf = leaf_index(forest.tree(b), X)
        use = forest.inbag[b] == 0 if oob else np.ones(n, dtype=bool)
        for i in range(n):
            for j in range(n):
                if use[i] and use[j]:
                    counted[i, j] += 1
                    together[i, j] += leaf[i] == leaf[j]
    out = np.full((n, n), np.nan)
    np.divide(together, counted, out=out, where=counted > 0)
    np.fill_diagonal(out, 1.0)
    return out


class TestProximityValidation:
    def test_messages(self, small):
        forest, X, y = small
        with pytest.raises(TypeError, match="`oob` must be True or False"):
            forest.proximity(oob="yes")
        with pytest.raises(ValueError, match="`oob=True` needs the training cases"):
            forest.proximity(X=X)
        with pytest.raises(ValueError, match="`block` must be a positive int"):
            forest.proximity(block=0)
        with pytest.raises(ValueError, match=r"`dims` must be between 1 and 59"):
            forest.proximity_map(dims=60)
        with pytest.raises(TypeError, match="`dims` must be an int"):
            forest.proximity_map(dims=2.0)
        with pytest.raises(ValueError, match="`y` .* is needed with new `X`"):
            forest.outlyingness(oob=False, X=X)
        with pytest.raises(ValueError, match="pass `y` only together with new `X`"):
            forest.outlyingness(y=y)
        with pytest.raises(ValueError, match="`distances` must be finite, non-negative and symmetric"):
            fl.classical_scaling(np.array([[0.0, 1.0], [2.0, 0.0]]))
        with pytest.raises(ValueError, match="`distances` must be a square matrix"):
            fl.classical_scaling(np.zeros((2, 3)))


class TestProximity:
    @pytest.mark.parametrize("oob", [True, False])
    def test_equals_slow_reference(self, small, oob):
        forest, X, _ = small
        P = forest.proximity(oob)
        assert np.allclose(P, slow_proximity(forest, X, oob), equal_nan=True)
        assert not np.isnan(P).any()
        assert np.array_equal(P, P.T)
        assert np.all(np.diag(P) == 1.0)
        assert P.min() >= 0.0 and P.max() <= 1.0

    def test_blocks_do_not_change_the_result(self, small):
        forest, _, _ = small
        assert np.array_equal(forest.proximity(block=7), forest.proximity())
        assert np.array_equal(forest.proximity(False, block=1), forest.proximity(False))

    def test_new_cases(self, small):
        forest, X, _ = small
        new = X[:25] + 0.1
        assert np.allclose(forest.proximity(False, X=new), slow_proximity(forest, new, False)[:25, :25])

    def test_pairs_never_oob_together_warn(self, small):
        _, X, y = small
        tiny = fl.Forest(trees=2, rng=1).fit(X, y)
        with pytest.warns(fl.OverlapWarning, match="never out-of-bag in the same tree"):
            P = tiny.proximity()
        assert np.isnan(P).any() and np.all(np.diag(P) == 1.0)


class TestOutlyingness:
    def test_planted_outliers_rank_first(self):
        # Breiman & Cutler's outlyingness (random forests manual; formula from memory): a case of class 0
        # placed inside the class-1 cloud is far, in proximity, from the rest of its class. Six planted
        # cases among 300: recall in the top six measured 6/6 for seeds 0, 1, 2; required >= 5/6.
        rng = np.random.default_rng(0)
        n = 300
        y = np.repeat([0, 1], n // 2)
        X = rng.normal(size=(n, 5)) + np.where(y[:, None] == 1, 1.5, -1.5)
        planted = rng.choice(n // 2, 6, replace=False)
        X[planted] = rng.normal(size=(6, 5)) + 1.5
        forest = fl.Forest(trees=300, rng=0).fit(X, y)
        score = forest.outlyingness()
        assert len(set(np.argsort(-score)[:6].tolist()) & set(planted.tolist())) >= 5
        assert score[planted].min() > 10  # common practice: above about 10 is worth a look

    def test_equals_formula_on_the_matrix(self, small):
        forest, X, y = small
        P = forest.proximity()
        np.fill_diagonal(P, 0.0)
        expected = np.empty(60)
        for k in (0, 1):
            mine = y == k
            raw = 60 / (P[np.ix_(mine, mine)] ** 2).sum(axis=1)
            centre = np.median(raw)
            expected[mine] = (raw - centre) / np.median(np.abs(raw - centre))
        assert np.allclose(forest.outlyingness(block=9), expected)
        assert np.allclose(forest.outlyingness(False, X=X, y=y), forest.outlyingness(False))

    def test_regression_uses_one_group(self):
        rng = np.random.default_rng(2)
        X = rng.normal(size=(80, 2))
        forest = fl.Forest(trees=30, rng=3).fit(X, X[:, 0] + 0.1 * rng.normal(size=80))
        score = forest.outlyingness()
        assert score.shape == (80,) and np.median(score) == pytest.approx(0.0, abs=1e-12)


class TestProximityMap:
    @pytest.mark.parametrize("limit", [500, 5])
    def test_recovers_euclidean_configuration(self, monkeypatch, limit):
        # Classical scaling of Euclidean distances is exact (Torgerson 1952; Gower 1966, Biometrika 53):
        # the map reproduces the distances, and the eigenvalues match numpy's full eigendecomposition of
        # -1/2 J D^2 J. limit=5 takes the iterative (scipy eigsh) route.
        monkeypatch.setattr(_proximity, "DENSE_EIGEN_LIMIT", limit)
        points = np.random.default_rng(4).normal(size=(30, 2)) * [3.0, 1.0]
        D = scipy.spatial.distance.squareform(scipy.spatial.distance.pdist(points))
        result = fl.classical_scaling(D, dims=2)
        assert np.allclose(scipy.spatial.distance.pdist(result.coordinates), scipy.spatial.distance.pdist(points))
        J = np.eye(30) - 1.0 / 30
        reference = np.linalg.eigvalsh(-0.5 * J @ (D**2) @ J)[::-1]
        assert np.allclose(result.eigenvalues, reference[:2])
        assert result.explained.sum() == pytest.approx(1.0)

    def test_forest_map_is_scaling_of_one_minus_proximity(self, small):
        forest, _, _ = small
        result = forest.proximity_map(dims=3)
        D = 1.0 - forest.proximity()
        J = np.eye(60) - 1.0 / 60
        values, vectors = np.linalg.eigh(-0.5 * J @ (D**2) @ J)
        reference = vectors[:, ::-1][:, :3] * np.sqrt(values[::-1][:3])
        assert np.allclose(np.abs(result.coordinates), np.abs(reference))
        assert result.coordinates.shape == (60, 3)
        assert "dims=3" in repr(result)
