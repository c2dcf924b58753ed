"""``print(forest)``: short settings before fit; after fit what a user wants at a glance, the out-of-bag error
computed at most once and shared with ``forest.oob``."""

from __future__ import annotations

import os
import re
import tempfile

import numpy as np
import pytest

import forestlab as fl
import forestlab.analyses.oob as oob_module
from forestlab.synthetic import friedman1, twonorm


def _classes():
    X, y = twonorm(300, dims=5, rng=1)
    return X, np.where(y == 1, "pass", "fail")


def test_an_unfitted_forest_shows_the_settings_that_differ():
    assert repr(fl.Forest(trees=50, rng=7, class_priors="equal")) == "Forest(trees=50, rng=7, class_priors='equal')"
    assert repr(fl.Forest()) == "Forest()"


def test_a_fitted_classification_forest():
    X, y = _classes()
    forest = fl.Forest(trees=50, rng=7).fit(X, y)
    text = str(forest)
    lines = text.splitlines()
    assert lines[0] == "Forest for classification, fitted on 300 cases x 5 features; 2 classes: 'fail', 'pass'"
    assert re.fullmatch(r"  trees +50, grown by Gini impurity, leaves of at least 1 \(weighted\) case", lines[1])
    # floor(sqrt(5)) = 2 candidates (common practice for classification)
    assert re.fullmatch(r"  candidates +2 of the 5 features at every node \(random subset\)", lines[2])
    assert re.fullmatch(rf"  out-of-bag +misclassification rate {forest.oob.error:.4g}; every case was out-of-bag "
                        r"for some tree", lines[3])
    assert repr(forest) == text


def test_cases_never_out_of_bag_are_counted_from_the_inbag_counts():
    """Few trees leave cases in every bootstrap sample; the print counts them (and does not warn: the suite
    turns warnings into errors)."""
    X, y = friedman1(200, rng=1)
    forest = fl.Forest(trees=4, rng=3, min_leaf=3, depth_limit=4).fit(X, y)
    never = int(np.sum(np.all(forest.inbag > 0, axis=0)))   # in every tree's sample
    assert never > 0
    lines = str(forest).splitlines()
    assert lines[0] == "Forest for regression, fitted on 200 cases x 10 features"
    assert "leaves of at least 3 (weighted) cases, depth at most 4" in lines[1]
    assert "3 of the 10 features" in lines[2]   # max(1, floor(p / 3)) for regression (common practice)
    with pytest.warns(fl.NeverOutOfBagWarning):
        fresh = fl.Forest(trees=4, rng=3, min_leaf=3, depth_limit=4).fit(X, y).oob
    assert lines[3].endswith(f"mean squared error {fresh.error:.4g}, explained variance "
                             f"{fresh.explained_variance:.3f}; {never} of 200 cases were never out-of-bag (left out)")


def test_the_out_of_bag_results_are_computed_once_and_shared(monkeypatch):
    calls = []
    real = oob_module.out_of_bag
    monkeypatch.setattr(oob_module, "out_of_bag", lambda *a, **k: calls.append(1) or real(*a, **k))
    X, y = _classes()
    forest = fl.Forest(trees=20, rng=2).fit(X, y)
    assert not calls   # fitting alone computes nothing
    first = str(forest)
    assert str(forest) == first and len(calls) == 1
    assert f"{forest.oob.error:.4g}" in first and len(calls) == 1   # the same results
    forest.add_trees(X, y, trees=5)
    assert "25, grown" in str(forest) and len(calls) == 2


def test_a_loaded_forest():
    X, y = _classes()
    forest = fl.Forest(trees=10, sampler=fl.AllFeatures(), rng=1).fit(X, y)
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "m.npz")
        forest.save(path)   # stores the out-of-bag results, not the data
        loaded = fl.load(path)
    assert str(loaded) == str(forest)
    assert "all 5 features at every node (bagging)" in str(loaded)
    loaded._oob = None   # as a file without out-of-bag results loads
    assert "error not known (loaded without the training data or out-of-bag results)" in str(loaded)


def test_many_classes_are_counted_beyond_the_first_few():
    X, _ = _classes()
    forest = fl.Forest(trees=5, sampler=fl.TreeSubspace(2), splitter="entropy", rng=1).fit(X, np.arange(300) % 9)
    lines = str(forest).splitlines()
    assert lines[0].endswith("9 classes: 0, 1, 2, 3, 4, 5 and 3 more")
    assert "grown by entropy" in lines[1] and "2 of the 5 features, one subset per tree" in lines[2]
