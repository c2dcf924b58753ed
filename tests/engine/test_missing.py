"""Missing predictor values (NaN): learned directions, and accuracy on data with real gaps."""

from __future__ import annotations

import numpy as np
import pytest
from refdata import load_table, published

import forestlab as fl
from forestlab import synthetic


def _hold_out_errors(X, y, repeats, rng, **settings):
    errors = []
    n = len(y)
    for r in range(repeats):
        test = rng.permutation(n)[: n // 10]
        train = np.setdiff1d(np.arange(n), test)
        forest = fl.Forest(rng=r, **settings).fit(X[train], y[train])
        errors.append(np.mean(forest.predict(X[test]) != y[test]))
    return np.array(errors)


class TestMissingValues:
    def test_direction_is_learned_from_the_training_cases(self):
        # one feature, missing exactly for class 1: the root must send NaN to the class-1 side
        rng = np.random.default_rng(0)
        x = rng.normal(size=400)
        y = (x > 0.5).astype(int)
        x[y == 1] = np.where(rng.random((y == 1).sum()) < 0.5, np.nan, x[y == 1])
        forest = fl.Forest(trees=1, sampler=fl.AllFeatures(), sample_size=400, replace=False, rng=0)
        forest.fit(x[:, None], y)
        assert forest.predict(np.array([[np.nan]]))[0] == 1
        assert forest.predict(np.array([[-2.0]]))[0] == 0

    def test_unseen_missingness_goes_to_the_heavier_child(self):
        rng = np.random.default_rng(1)
        x = rng.uniform(size=(300, 1))
        y = (x[:, 0] > 0.8).astype(int)
        tree = fl.Forest(trees=1, sampler=fl.AllFeatures(), sample_size=300, replace=False, rng=0,
                         depth_limit=1).fit(x, y).tree(0)
        heavier_left = tree.cases[1] >= tree.cases[2]
        assert tree.missing_left[0] == heavier_left

    @pytest.mark.slow
    def test_informative_and_uninformative_missingness(self):
        # Synthetic, our own: twonorm (forestlab.synthetic) with 30% of feature values removed
        # (a) completely at random: the forest stays close to the complete-data forest;
        # (b) removed only where the value is large: missingness itself carries signal.
        rng = np.random.default_rng(7)
        X, y = synthetic.twonorm(2400, rng=rng)
        Xt, yt = synthetic.twonorm(4000, rng=rng)
        full = fl.Forest(trees=100, rng=1).fit(X, y)
        err_full = np.mean(full.predict(Xt) != yt)

        def random_holes(A):
            A = A.copy()
            A[rng.random(A.shape) < 0.3] = np.nan
            return A

        forest = fl.Forest(trees=100, rng=1).fit(random_holes(X), y)
        err_random = np.mean(forest.predict(random_holes(Xt)) != yt)
        assert err_random < err_full + 0.06          # measured: 0.074 vs 0.037 complete

        def censor(A):
            A = A.copy()
            A[A > 0.8] = np.nan                      # large values are not recorded
            return A

        forest = fl.Forest(trees=100, rng=1).fit(censor(X), y)
        err_censored = np.mean(forest.predict(censor(Xt)) != yt)
        # a NaN says "large", which points to class 1: learned directions keep the error near complete data

        assert err_censored < err_full + 0.03        # measured: 0.038 vs 0.037 complete

    @pytest.mark.slow
    def test_breast_cancer_with_its_missing_cells(self):
        # Breiman (2001) "Random Forests", Table 2, Forest-RI on breast cancer: about 2.7-2.9% (from memory);
        # here the 16 missing Bare.nuclei cells are kept as NaN. 20 random 10% hold-outs, 100 trees.
        X, labels, _ = load_table("breastcancer")
        assert np.isnan(X).sum() == 16
        errors = _hold_out_errors(X, labels, 20, np.random.default_rng(11), trees=100,
                                  sampler=fl.RandomSubset("log2"))
        low, high = published("breastcancer", "Single input"), published("breastcancer", "Selection")
        standard_error = np.sqrt(0.028 * 0.972 / 70 / 20)

        # measured: 3.2% mean error
        assert low / 100 - 3 * standard_error - 0.01 <= errors.mean() <= high / 100 + 3 * standard_error + 0.01
