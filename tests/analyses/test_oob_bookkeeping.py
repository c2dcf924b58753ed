"""`Forest.oob` equals a slow per-tree reference loop written here from `per_tree`, `inbag` and y.

References: Breiman (1996), "Out-of-bag estimation" (a case is out-of-bag for the trees whose bootstrap sample
missed it; its OOB prediction aggregates only those trees); Breiman (2001), "Random forests", section 2.2
(margin function mr, strength s) and appendix II (OOB estimates of s, rho-bar via p1, p2 per tree).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import forestlab as fl


def _problem(seed, n, p, classes):
    rng = np.random.default_rng(seed)
    X = rng.integers(0, 4, size=(n, p)).astype(float) + (rng.random((n, p)) < 0.5) * rng.normal(size=(n, p))
    if classes:
        y = rng.integers(0, classes, size=n)
        y[:classes] = np.arange(classes)          # every class present
    else:
        y = X[:, 0] + rng.normal(size=n)
    return X, y


def _oob(forest):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", fl.NeverOutOfBagWarning)
        return forest.oob


def reference_classification(P, oob, y, K, upto):
    """OOB votes, labels, margins and error of the forest of trees 0..upto-1, case by case."""
    n = y.size
    votes = np.full((n, K), np.nan)
    coverage = np.zeros(n, dtype=int)
    for i in range(n):
        trees = [b for b in range(upto) if oob[b, i]]
        coverage[i] = len(trees)
        if trees:
            votes[i] = [np.mean(P[trees, i] == k) for k in range(K)]
    covered = coverage > 0
    label = np.array([int(np.argmax(v)) if c else -1 for v, c in zip(votes, covered)])
    margins = np.array([v[t] - max(v[j] for j in range(K) if j != t) if c else np.nan
                        for v, t, c in zip(votes, y, covered)])
    error = np.mean(label[covered] != y[covered]) if covered.any() else np.nan
    return votes, coverage, label, margins, error


def reference_regression(P, oob, y, upto):
    n = y.size
    pred = np.full(n, np.nan)
    z = np.full(n, np.nan)
    for i in range(n):
        trees = [b for b in range(upto) if oob[b, i]]
        if trees:
            pred[i] = np.mean(P[trees, i])
            sd = np.std(P[trees, i])
            r = y[i] - pred[i]
            z[i] = r / sd if sd > 0 else (0.0 if r == 0 else np.copysign(np.inf, r))
    covered = ~np.isnan(pred)
    error = np.mean((y[covered] - pred[covered]) ** 2) if covered.any() else np.nan
    return pred, z, error


def reference_strength(P, oob, y, votes, K):
    """Breiman (2001) appendix II, written out per case and per tree."""
    covered = ~np.isnan(votes[:, 0])
    j_hat = np.zeros(y.size, dtype=int)
    mr = []
    for i in np.flatnonzero(covered):
        wrong = [j for j in range(K) if j != y[i]]
        j_hat[i] = wrong[int(np.argmax(votes[i, wrong]))]
        mr.append(votes[i, y[i]] - votes[i, j_hat[i]])
    mr = np.array(mr)
    s = mr.mean()
    var_mr = np.mean(mr**2) - s**2
    sds = []
    for b in range(P.shape[0]):
        cases = np.flatnonzero(oob[b])
        if cases.size:
            p1 = np.mean(P[b, cases] == y[cases])
            p2 = np.mean(P[b, cases] == j_hat[cases])
            sds.append(np.sqrt(p1 + p2 - (p1 - p2) ** 2))
    rho = var_mr / np.mean(sds) ** 2 if np.mean(sds) > 0 else np.nan
    return s, rho, rho * (1 - s**2) / s**2 if s > 0 else np.inf


problems = st.tuples(st.integers(0, 2**32 - 1), st.integers(6, 30), st.integers(1, 3), st.integers(1, 7))


class TestOutOfBagEqualsPerTreeLoop:
    @given(problems, st.integers(2, 3))
    def test_classification(self, problem, K):
        seed, n, p, trees = problem
        X, y = _problem(seed, n, p, K)
        forest = fl.Forest(trees=trees, rng=seed).fit(X, y)
        oob = _oob(forest)
        P, out = forest.per_tree(X), forest.inbag == 0
        votes, coverage, label, margins, error = reference_classification(P, out, y, K, trees)
        np.testing.assert_array_equal(oob.coverage, coverage)
        np.testing.assert_allclose(oob.votes, votes, rtol=1e-12, atol=1e-15)
        np.testing.assert_array_equal(oob.class_index, label)
        np.testing.assert_allclose(oob.margins, margins, rtol=1e-12, atol=1e-15)
        np.testing.assert_equal(oob.error, error)
        covered = coverage > 0
        assert list(oob.predictions[covered]) == list(forest.classes[label[covered]])
        assert all(v is None for v in oob.predictions[~covered])
        curve = [reference_classification(P, out, y, K, b + 1)[4] for b in range(trees)]
        np.testing.assert_array_equal(oob.error_curve, curve)
        confusion = np.zeros((K, K), dtype=int)
        np.add.at(confusion, (y[covered], label[covered]), 1)
        np.testing.assert_array_equal(oob.confusion, confusion)
        if covered.any():
            s, rho, bound = reference_strength(P, out, y, votes, K)
            np.testing.assert_allclose([oob.strength, oob.correlation, oob.error_bound], [s, rho, bound],
                                       rtol=1e-9, atol=1e-12)

    @given(problems)
    def test_regression(self, problem):
        seed, n, p, trees = problem
        X, y = _problem(seed, n, p, 0)
        forest = fl.Forest(trees=trees, min_leaf=1, rng=seed).fit(X, y)
        oob = _oob(forest)
        P, out = forest.per_tree(X), forest.inbag == 0
        pred, z, error = reference_regression(P, out, y, trees)
        np.testing.assert_array_equal(oob.coverage, out.sum(axis=0))
        np.testing.assert_allclose(oob.predictions, pred, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(oob.residuals, y - pred, rtol=1e-12, atol=1e-12)
        finite = np.isfinite(z) & (np.abs(z) < 1e6)   # near-zero spreads make z ill-conditioned
        np.testing.assert_allclose(oob.margins[finite], z[finite], rtol=1e-8)
        assert np.array_equal(np.isnan(oob.margins), np.isnan(z))
        np.testing.assert_allclose(oob.error, error, rtol=1e-12)
        curve = [reference_regression(P, out, y, b + 1)[2] for b in range(trees)]
        np.testing.assert_allclose(oob.error_curve, curve, rtol=1e-10, atol=1e-12)


class TestOutOfBagResult:
    def test_validation(self):
        X, y = _problem(1, 40, 2, 2)
        oob = fl.Forest(trees=20, rng=1).fit(X, y).oob
        with pytest.raises(TypeError, match="`threshold` must be a finite real number"):
            oob.doubtful(threshold="low")
        with pytest.raises(TypeError, match="`threshold` must be a finite real number"):
            oob.doubtful(threshold=np.nan)
        with pytest.raises(ValueError, match="`top` must be None or a non-negative int"):
            oob.doubtful(top=-1)
        with pytest.raises(ValueError, match="`tolerance` must be a non-negative number"):
            oob.settles_at(-0.1)
        with pytest.raises(RuntimeError, match="not fitted yet"):
            fl.Forest().oob  # noqa: B018

    def test_never_out_of_bag_cases_warn_and_are_left_out(self):
        # Common practice: with B trees a case is never OOB with probability about (1 - 1/e)^B.
        X, y = _problem(3, 60, 2, 2)
        forest = fl.Forest(trees=2, rng=3).fit(X, y)
        with pytest.warns(fl.NeverOutOfBagWarning, match=r"cases were in every bootstrap sample") as record:
            oob = forest.oob
        assert record[0].filename == __file__          # points at the user's line
        never = oob.coverage == 0
        assert never.any() and not never.all()
        assert np.isnan(oob.margins[never]).all() and np.isnan(oob.votes[never]).all()
        assert (oob.class_index[never] == -1).all()
        covered = ~never
        assert oob.error == np.mean(oob.class_index[covered] != forest._view.y[covered])
        assert oob.confusion.sum() == covered.sum()
        assert not np.isin(np.flatnonzero(never), oob.doubtful(threshold=2.0).case).any()

    def test_no_case_ever_out_of_bag(self):
        # subsamples of every case leave nothing out-of-bag: every result is empty, not an error (or a hang)
        X, y = _problem(3, 40, 2, 2)
        forest = fl.Forest(trees=3, sample_size=40, replace=False, rng=1).fit(X, y)
        with pytest.warns(fl.NeverOutOfBagWarning, match=r"40 of 40 cases were in every bootstrap sample"):
            oob = forest.oob
        assert (oob.coverage == 0).all() and np.isnan(oob.error) and np.isnan(oob.error_curve).all()

    def test_result_is_cached_and_read_only(self):
        X, y = _problem(2, 50, 2, 3)
        forest = fl.Forest(trees=30, rng=2).fit(X, y)
        assert forest.oob is forest.oob
        with pytest.raises(ValueError, match="read-only"):
            forest.oob.margins[0] = 1.0
        with pytest.raises(AttributeError):
            forest.oob.error = 0.0

    def test_doubtful_table(self):
        X, y = _problem(4, 80, 2, 2)
        oob = fl.Forest(trees=40, rng=4).fit(X, y).oob
        table = oob.doubtful(threshold=0.2)
        assert np.all(table.margin < 0.2) and np.all(np.diff(table.margin) >= 0)
        assert set(table.case) == set(np.flatnonzero(oob.margins < 0.2))
        assert len(oob.doubtful(threshold=0.2, top=3)) == min(3, len(table))
        text = str(table)
        lines = text.splitlines()
        assert lines[0].startswith(f"{len(table)} doubtful case")
        assert lines[1].split() == ["case", "observed", "oob", "label", "margin", "oob", "trees"]
        assert len(lines) == 2 + min(len(table), 25) + (len(table) > 25)
        first = lines[2].split()
        assert int(first[0]) == table.case[0] and float(first[3]) == pytest.approx(table.margin[0], abs=5e-4)

    def test_doubtful_regression_ranks_by_size(self):
        X, y = _problem(5, 80, 2, 0)
        oob = fl.Forest(trees=40, rng=5).fit(X, y).oob
        table = oob.doubtful(threshold=1.0, top=10)
        size = np.abs(table.margin)
        assert np.all(size > 1.0) and np.all(np.diff(size) <= 0)
        assert np.array_equal(table.out_of_bag, oob.predictions[table.case])
        assert "z margin" in str(table)

    def test_settles_at_matches_its_definition(self):
        X, y = _problem(6, 120, 2, 2)
        oob = fl.Forest(trees=60, rng=6).fit(X, y).oob
        for tol in (0.0, 0.05, 0.2, 1.0):
            band = tol * oob.error
            expected = next(b for b in range(1, 61)
                            if all(abs(oob.error_curve[c - 1] - oob.error) <= band for c in range(b, 61)))
            assert oob.settles_at(tol) == expected

    def test_regression_summaries(self):
        X, y = _problem(7, 100, 2, 0)
        oob = fl.Forest(trees=50, rng=7).fit(X, y).oob
        assert oob.explained_variance == pytest.approx(1 - oob.error / np.var(y), rel=1e-12)
        assert oob.votes is None and oob.strength is None and oob.confusion is None
        assert oob.error_curve[-1] == pytest.approx(oob.error, rel=1e-12)


class TestWeightedOutOfBag:
    """With case weights the OOB error is the weighted share (or mean square) over the covered cases."""

    def test_weighted_error_and_curve(self):
        rng = np.random.default_rng(8)
        X = rng.normal(size=(200, 3))
        y = (X[:, 0] + rng.normal(scale=0.8, size=200) > 0).astype(int)
        w = rng.integers(1, 5, 200).astype(float)
        oob = fl.Forest(trees=40, rng=3).fit(X, y, weights=w).oob
        covered = oob.coverage > 0
        wrong = oob.class_index != y
        assert oob.error == pytest.approx(np.sum(w[covered & wrong]) / np.sum(w[covered]), rel=1e-12)
        assert oob.error_curve[-1] == pytest.approx(oob.error, rel=1e-12)
        assert oob.confusion.sum() == pytest.approx(w[covered].sum())

    def test_weighted_mean_squared_error(self):
        rng = np.random.default_rng(9)
        X = rng.uniform(size=(200, 3))
        y = 3 * X[:, 0] + rng.normal(scale=0.3, size=200)
        w = rng.uniform(0.5, 2.0, 200)
        oob = fl.Forest(trees=40, rng=3).fit(X, y, weights=w).oob
        covered = oob.coverage > 0
        expected = np.average(oob.residuals[covered] ** 2, weights=w[covered])
        assert oob.error == pytest.approx(expected, rel=1e-12)
        assert oob.error_curve[-1] == pytest.approx(expected, rel=1e-9)
