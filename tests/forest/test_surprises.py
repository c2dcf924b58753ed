"""Things that used to happen silently or obscurely, now said: a capped candidate count, every float value a
class, a user splitter that raises, more trees than memory holds, saving into a missing folder."""

from __future__ import annotations

import os
import warnings

import numpy as np
import pytest

import forestlab as fl
import forestlab.intake.memory as memory


def _data(n=40, p=4, seed=0):
    X = np.random.default_rng(seed).normal(size=(n, p))
    return X, (X[:, 0] + X[:, 1] > 0).astype(int)


class TestCandidateCount:
    @pytest.mark.parametrize("sampler, shown", [(fl.RandomSubset(9), "RandomSubset(9)"), (9, "RandomSubset(9)"),
                                                (fl.TreeSubspace(9), "TreeSubspace(9)")])
    def test_more_candidates_than_features_warns_naming_m_and_p(self, sampler, shown):
        X, y = _data()
        with pytest.warns(fl.CandidatesCappedWarning, match=rf"{shown.replace('(', '[(]').replace(')', '[)]')} asks "
                                                            r"for m = 9 candidate features .* but the data have p = 4; "
                                                            r"all 4 are candidates"):
            forest = fl.Forest(trees=2, sampler=sampler, rng=0).fit(X, y)
        assert issubclass(fl.CandidatesCappedWarning, fl.ForestlabWarning)
        assert forest.sampler.m == 4

    @pytest.mark.parametrize("sampler", [fl.RandomSubset(4), fl.RandomSubset("log2"), 0.9, None, fl.TreeSubspace(3)])
    def test_a_count_that_fits_is_quiet(self, sampler):
        X, y = _data()
        fl.Forest(trees=2, sampler=sampler, rng=0).fit(X, y)   # the suite turns warnings into errors


class TestFloatTargetAsClasses:
    def test_many_distinct_floats_are_refused_naming_the_fix(self):
        X, _ = _data()
        y = X[:, 2] * 3.7   # a quantity: 40 distinct values
        with pytest.raises(ValueError, match=r"`y` holds 40 distinct float values among 40 cases, .* give "
                                             r"`task=\"regression\"`"):
            fl.Forest(trees=2, splitter="gini").fit(X, y)
        with pytest.raises(ValueError, match=r"give `task=\"regression\"`"):
            fl.Forest(trees=2, task="classification").fit(X, y)
        assert fl.Forest(trees=2, task="regression", rng=0).fit(X, y).task == "regression"

    def test_float_labels_of_a_few_classes_stay_classes(self):
        X, y = _data()
        forest = fl.Forest(trees=2, splitter="gini", rng=0).fit(X, y * 0.5)   # 0.0 and 0.5
        assert forest.classes.tolist() == [0.0, 0.5]
        half = np.arange(40) % 20 * 1.0   # 20 classes of 2 cases: exactly half, still allowed
        assert fl.Forest(trees=2, task="classification", rng=0).fit(X, half).classes.size == 20


class RaisingGini(fl.GiniSplitter):
    """Gini that raises ZeroDivisionError from ``impurity`` after ``calm`` calls (or from ``statistics``)."""

    def __init__(self, where="impurity", calm=0):
        self.where, self.calm = where, calm

    def statistics(self, y, classes):
        if self.where == "statistics":
            raise ZeroDivisionError("statistics went wrong")
        return super().statistics(y, classes)

    def impurity(self, S):
        if self.where == "impurity":
            if self.calm <= 0:
                raise ZeroDivisionError("impurity went wrong")
            self.calm -= 1
        return super().impurity(S)


class TestSplitterThatRaises:
    @pytest.mark.parametrize("where, calm, shown", [
        ("statistics", 0, r"RaisingGini.statistics\(int64 array of shape \(40,\), 2\)"),
        ("impurity", 0, r"RaisingGini.impurity\(float64 array of shape \(40, 3\)\)"),   # the first probe at fit
        ("impurity", 3, r"RaisingGini.impurity\(float64 array of shape \(\d+, 3\)\)"),   # during growth
    ])
    def test_the_error_names_the_class_and_what_it_was_given(self, where, calm, shown):
        X, y = _data()
        with pytest.raises(RuntimeError, match=shown + rf" raised ZeroDivisionError: {where} went wrong") as info:
            fl.Forest(trees=2, splitter=RaisingGini(where, calm), rng=0).fit(X, y)
        assert isinstance(info.value.__cause__, ZeroDivisionError)

    def test_in_worker_processes_too(self):
        X, y = _data()
        with pytest.raises(fl.TreeGrowthError, match=r"RuntimeError: RaisingGini.impurity\(float64 array of shape "
                                                     r"\(\d+, 3\)\) raised ZeroDivisionError") as info:
            fl.Forest(trees=4, splitter=RaisingGini("impurity", 3), workers=2, rng=0).fit(X, y)
        assert "ZeroDivisionError: impurity went wrong" in str(info.value.__cause__.__cause__)   # its traceback


class TestMemory:
    def test_more_trees_than_memory_holds_are_refused_before_growing(self, monkeypatch):
        monkeypatch.setattr(memory, "available_memory", lambda: 8 * 10**9)
        X, y = _data(n=50)
        with pytest.raises(MemoryError, match=r"100,000,000 trees \(`trees`\) on 50 cases need at least 105.0 GB "
                                              r"of memory \(in-bag counts 5.0 GB: .*\), more than the 8.0 GB "
                                              r"available; grow fewer trees"):
            fl.Forest(trees=10**8, rng=0).fit(X, y)
        forest = fl.Forest(trees=3, rng=0).fit(X, y)
        with pytest.raises(MemoryError, match=r"100,000,000 trees"):
            forest.add_trees(X, y, trees=10**8)
        assert forest.trees == 3

    def test_the_rule_lets_big_fits_through(self):
        """One byte per tree and case plus about 1 kB a tree: 2 000 trees on a million cases need 2 GB."""
        memory.check_memory(2000, 10**6, available=4 * 10**9)
        memory.check_memory(10**6, 1000, available=4 * 10**9)   # a million small trees: 2 GB
        with pytest.raises(MemoryError):
            memory.check_memory(2000, 10**6, available=10**9)
        assert memory.available_memory() is None or memory.available_memory() > 0


def test_saving_into_a_missing_folder_names_the_folder(tmp_path):
    X, y = _data()
    forest = fl.Forest(trees=2, rng=0).fit(X, y)
    missing = tmp_path / "no such folder"
    with pytest.raises(FileNotFoundError, match=r"the folder '.*no such folder' does not exist") as info:
        forest.save(missing / "model.npz")
    assert ".forestlab-" not in str(info.value) and not missing.exists()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        forest.save(tmp_path / "model.npz")
    assert os.listdir(tmp_path) == ["model.npz"]
