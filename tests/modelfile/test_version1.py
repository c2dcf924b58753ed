"""Model files of format version 1 still load: they called the class priors "class weights".

Version 1 (forestlab 0.1.0) wrote the setting ``class_weights`` (null, ``"balanced"`` or ``"given"``) and the
header field ``class_weight_values``, the factor each case of a class was weighted by; version 2 writes the
setting ``class_priors`` (null, ``"equal"`` or ``"given"``), the priors and those factors
(docs/file-format.md). Each test writes a version-1 file exactly as version 1 laid it out (the header of a
version-2 file taken back field by field) and loads it.
"""

from __future__ import annotations

import os
import tempfile

import numpy as np
import pytest
from test_modelfile import _load_bytes, _members, _pack

import forestlab as fl
from forestlab.modelfile.container import FORMAT_VERSION


def _problem(n=150, seed=5):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    y = np.where(X[:, 0] + 0.5 * X[:, 1] > 0.6, "bad", "ok")
    return X, y


def _version1(forest, include_data):
    """The bytes a version-1 writer gave for ``forest``: its class factors were version 1's class weights
    (``"balanced"`` when they came from equal priors, else given as they are)."""
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "m.npz")
        forest.save(path, include_data=include_data)
        with open(path, "rb") as fh:
            header, arrays = _members(fh.read())
    assert header["format_version"] == FORMAT_VERSION == 2
    settings = header["settings"]
    priors = settings.pop("class_priors")
    settings["class_weights"] = None if priors is None else ("balanced" if priors == "equal" else "given")
    header["class_weight_values"] = header.pop("class_factors")
    del header["class_priors"]
    header["format_version"] = 1
    return _pack(header, arrays)


def _fit(priors, X, y, trees=8):
    return fl.Forest(trees=trees, rng=4, class_priors=priors).fit(X, y)


@pytest.mark.parametrize("include_data", [False, True])
@pytest.mark.parametrize("priors", [None, "equal", {"bad": 0.7, "ok": 0.3}])
def test_a_version1_file_loads_with_its_priors(priors, include_data):
    X, y = _problem()
    forest = _fit(priors, X, y)
    loaded = _load_bytes(_version1(forest, include_data))
    np.testing.assert_array_equal(loaded.per_tree(X), forest.per_tree(X))
    # version 1's given weights become the priors they amount to (from the targets, or the OOB labels)
    assert loaded.class_priors == (None if priors is None else pytest.approx(forest.class_priors, rel=1e-12))
    assert loaded._settings.class_priors == ("equal" if priors == "equal" else loaded.class_priors)
    assert loaded._grown.class_factors == forest._grown.class_factors   # as stored: what the trees grew with
    if include_data:   # grows on with the factors of the file, like one fit of all the trees
        grown = loaded.add_trees(X, y, trees=4)
        np.testing.assert_array_equal(grown.per_tree(X), _fit(priors, X, y, trees=12).per_tree(X))


def test_a_version1_file_without_class_totals_keeps_its_factors():
    """Neither the training data nor the out-of-bag labels: the factors stay, the priors are unknown."""
    X, y = _problem()
    forest = _fit({"bad": 0.7, "ok": 0.3}, X, y)
    header, arrays = _members(_version1(forest, include_data=False))
    header["has_oob"] = False
    for name in [k for k in arrays if k.startswith("oob_")]:
        del arrays[name]
    loaded = _load_bytes(_pack(header, arrays))
    assert loaded.class_priors is None and loaded._grown.class_factors == forest._grown.class_factors
    np.testing.assert_array_equal(loaded.predict(X), forest.predict(X))


def test_unknown_versions_are_refused():
    X, y = _problem()
    header, arrays = _members(_version1(_fit(None, X, y), include_data=False))
    header["format_version"] = 3
    with pytest.raises(fl.ModelFileError, match=r"format version 3 is not supported \(this forestlab reads "
                                                r"versions 1, 2\)"):
        _load_bytes(_pack(header, arrays))
