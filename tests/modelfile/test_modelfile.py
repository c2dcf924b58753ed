"""Saving and loading forests: round trips, atomic writes, and a loader that refuses damaged files.

The file layout under test is forestlab's own (docs/file-format.md); the container is NumPy's documented
``.npz`` / ``.npy`` format (NEP 1, "A simple file format for NumPy arrays"), read here independently with
``zipfile`` and ``numpy.lib.format`` to craft hostile files.
"""

from __future__ import annotations

import io
import json
import os
import tempfile
import warnings
import zipfile

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import forestlab as fl
from forestlab.modelfile.container import read_model, write_model

NODE_ARRAYS = ("feature", "threshold", "left", "right", "value", "cases", "impurity_decrease", "depth",
               "missing_left", "category_left")


def _data(n=150, p=4, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    return X, X[:, 0] + 0.5 * X[:, 1] ** 2 + 0.1 * rng.normal(size=n)


def _labels(kind, score):
    if kind == "str":
        return np.where(score > 0.5, "high", np.where(score > -0.3, "mid", "low"))
    if kind == "int":
        return np.digitize(score, [-0.3, 0.5]) * 10 - 5
    if kind == "bool":
        return score > 0.2
    if kind == "float":
        return np.digitize(score, [0.0]) * 0.5
    if kind == "object":
        return np.array([str(v) for v in np.where(score > 0, "yes", "no")], dtype=object)
    raise AssertionError(kind)


CASES = {
    "str": dict(labels="str", options={}),
    "int-weights": dict(labels="int", options={}, weights=True),
    "bool-balance": dict(labels="bool", options={"balance": "classes"}),
    "float-class-priors": dict(labels="float", options={"task": "classification",
                                                        "class_priors": {0.0: 0.25, 0.5: 0.75}}),
    "object-entropy-subspace": dict(labels="object", options={"splitter": "entropy",
                                                             "sampler": fl.TreeSubspace(2)}),
    "str-equal-priors-weights-nonreplace": dict(labels="str", options={"class_priors": "equal", "replace": False,
                                                                       "sample_size": 0.6}, weights=True),
    "regression": dict(labels=None, options={}),
    "regression-missing-values": dict(labels=None, options={"min_leaf": 2}, gaps=True),
    "str-missing-values": dict(labels="str", options={}, gaps=True),
    "int-categorical-balance": dict(labels="int", options={"categorical": [3], "balance": "classes"}, gaps=True),
    "regression-categorical-weights": dict(labels=None, options={"categorical": [3]}, weights=True),
    "regression-weights-bagging": dict(labels=None, options={"sampler": fl.AllFeatures(), "min_leaf": 3},
                                       weights=True),
}


def _fit(case, seed=3):
    X, score = _data()
    y = score if case["labels"] is None else _labels(case["labels"], score)
    w = np.random.default_rng(1).uniform(0.2, 3, size=len(y)) if case.get("weights") else None
    w = None if w is None else (np.round(w) + 1 if case["labels"] == "int" else w)
    X = X.copy()
    X[:, 3] = np.random.default_rng(6).integers(0, 80, size=len(X))   # codes, categorical in some cases
    if case.get("gaps"):
        X[np.random.default_rng(2).random(X.shape) < 0.15] = np.nan
    return fl.Forest(trees=12, rng=seed, **case["options"]).fit(X, y, weights=w), X


def _save_load(forest, include_data=False, **load_options):
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "model.npz")
        forest.save(path, include_data=include_data)
        assert os.listdir(folder) == ["model.npz"]
        return fl.load(path, **load_options)


def _assert_same_forest(a, b):
    assert len(a._view.trees) == len(b._view.trees)
    for ta, tb in zip(a._view.trees, b._view.trees):
        for name in NODE_ARRAYS:
            x, z = getattr(ta, name), getattr(tb, name)
            assert x.dtype == z.dtype, name
            np.testing.assert_array_equal(x, z, err_msg=name)
    np.testing.assert_array_equal(a.inbag, b.inbag)
    assert not b.inbag.flags.writeable
    assert a.task == b.task and a.feature_names == b.feature_names and a.features == b.features
    if a.classes is None:
        assert b.classes is None
    else:
        assert a.classes.dtype == b.classes.dtype and a.classes.tolist() == b.classes.tolist()
        assert [type(v) for v in a.classes.tolist()] == [type(v) for v in b.classes.tolist()]
    if a.case_weights is None:
        assert b.case_weights is None
    else:
        np.testing.assert_array_equal(a.case_weights, b.case_weights)
    assert a.class_priors == b.class_priors and a.balance == b.balance
    assert a.sampler == b.sampler and a.splitter == b.splitter
    assert a.min_leaf == b.min_leaf and a.sample_size == b.sample_size and a.replace == b.replace
    assert a.seed.entropy == b.seed.entropy and tuple(a.seed.spawn_key) == tuple(b.seed.spawn_key)


class TestRoundTrip:
    @pytest.mark.parametrize("include_data", [False, True])
    @pytest.mark.parametrize("name", sorted(CASES))
    def test_identical_forest_and_predictions(self, name, include_data):
        forest, X = _fit(CASES[name])
        loaded = _save_load(forest, include_data=include_data)
        _assert_same_forest(forest, loaded)
        fresh = np.random.default_rng(9).normal(size=(60, X.shape[1])) * 2
        fresh[::7, 1] = np.nan
        fresh[:, 3] = np.random.default_rng(8).integers(0, 90, size=len(fresh))   # some categories unseen
        np.testing.assert_array_equal(loaded.per_tree(fresh), forest.per_tree(fresh))
        np.testing.assert_array_equal(loaded.predict(fresh), forest.predict(fresh))
        if forest.task == "classification":
            assert loaded.predict(fresh).dtype == forest.predict(fresh).dtype
        if include_data:
            np.testing.assert_array_equal(loaded._data.X, forest._data.X)
            np.testing.assert_array_equal(loaded._data.stats, forest._data.stats)
            for b in (0, 7):
                regrown = loaded.regrow(b)
                for attr in NODE_ARRAYS:
                    np.testing.assert_array_equal(getattr(regrown, attr), getattr(forest.tree(b), attr))
        else:
            assert loaded._data is None
            with pytest.raises(RuntimeError, match=r"loaded from a file without its training data"):
                loaded.regrow(0)
        again = _save_load(loaded, include_data=include_data)   # a loaded forest saves the same forest
        _assert_same_forest(forest, again)

    def test_frame_names_and_generator_seed(self):
        pd = pytest.importorskip("pandas")
        X, score = _data()
        df = pd.DataFrame(X, columns=["temp", "load", "speed", "age"])
        forest = fl.Forest(trees=5, rng=np.random.default_rng(4)).fit(df, _labels("str", score))
        loaded = _save_load(forest)
        assert loaded.feature_names == ("temp", "load", "speed", "age")
        np.testing.assert_array_equal(loaded.predict(df[["age", "speed", "load", "temp"]]), forest.predict(X))
        assert loaded.seed.entropy == forest.seed.entropy   # a list of words for a Generator's seed

    def test_validation(self):
        X, score = _data(n=30)
        with pytest.raises(RuntimeError, match=r"not fitted yet"):
            fl.Forest().save("never.npz")
        forest = fl.Forest(trees=2, rng=0).fit(X, _labels("str", score))
        with pytest.raises(TypeError, match=r"`path` must be a str or os.PathLike; got int"):
            forest.save(3)
        with pytest.raises(TypeError, match=r"`include_data` must be a bool"):
            forest.save("x.npz", include_data="yes")
        with pytest.raises(TypeError, match=r"`path` must be a str or os.PathLike"):
            fl.load(None)
        with pytest.raises(TypeError, match=r"`components` must hold sampler or splitter instances"):
            fl.load("x.npz", components=[3])
        loaded = _save_load(forest)
        with pytest.raises(RuntimeError, match=r"holds no training data"):
            loaded.save("x.npz", include_data=True)
        mixed = fl.Forest(trees=2, rng=0).fit(X, np.array([1, 2.5] * 15, dtype=object)[np.argsort(score)])
        with tempfile.TemporaryDirectory() as folder, pytest.raises(TypeError, match=r"mixed or unusual types"):
            mixed.save(os.path.join(folder, "m.npz"))


class TestAnalysesAfterLoad:
    def test_analyses_need_data_only_for_training_cases(self):
        # Analyses of held-out cases read only the trees; those of the training cases need the stored data.
        forest, X = _fit(CASES["int-categorical-balance"])
        y = _labels("int", _data()[1])
        bare, full = _save_load(forest), _save_load(forest, include_data=True)
        with pytest.raises(RuntimeError, match=r"loaded from a file without its training data"):
            bare.importance()
        held_out = bare.importance(X=X, y=y, rng=1)
        np.testing.assert_array_equal(held_out.per_tree, forest.importance(X=X, y=y, rng=1).per_tree)
        np.testing.assert_array_equal(full.importance(rng=2).per_tree, forest.importance(rng=2).per_tree)
        np.testing.assert_array_equal(full.proximity(oob=False), forest.proximity(oob=False))
        np.testing.assert_array_equal(bare.proximity(oob=False, X=X[:30]), forest.proximity(oob=False, X=X[:30]))


class TestGrowingALoadedForest:
    """A forest loaded with its data grows on exactly as if it had never been saved."""

    @pytest.mark.parametrize("name", ["str", "int-categorical-balance", "regression-categorical-weights"])
    def test_add_trees_equals_one_fit_of_all_trees(self, name):
        case = CASES[name]
        forest, X = _fit(case, seed=4)
        score = _data()[1]
        y = score if case["labels"] is None else _labels(case["labels"], score)
        w = forest.case_weights
        loaded = _save_load(forest, include_data=True).add_trees(X, y, trees=5)
        whole = fl.Forest(trees=17, rng=4, **case["options"]).fit(X, y, weights=w)
        _assert_same_forest(whole, loaded)

    def test_other_data_or_relabelled_classes_are_refused(self):
        forest, X = _fit(CASES["str"])
        y = _labels("str", _data()[1])
        loaded = _save_load(forest, include_data=True)
        with pytest.raises(ValueError, match=r"`add_trees` grows more trees on the data the forest was fit on, "
                                             r"but the values of `X` or `y` differ"):
            loaded.add_trees(X + 1.0, y, trees=2)
        renamed = np.char.add(y.astype(str), "!")   # the same class codes under other labels
        with pytest.raises(ValueError, match=r"the values of `X` or `y` differ"):
            loaded.add_trees(X, renamed, trees=2)

    def test_without_data_the_message_says_how_to_keep_it(self):
        forest, X = _fit(CASES["str"])
        with pytest.raises(RuntimeError, match=r"save it with `save\(path, include_data=True\)`"):
            _save_load(forest).add_trees(X, _labels("str", _data()[1]), trees=2)


class PoissonLike(fl.CartSplitter):
    """A custom criterion (squared error on log1p scale statistics) used to test custom-component handling."""

    task = "regression"

    def __init__(self, shrink=0.5):
        self.shrink = shrink
        self.helper = object()

    def statistics(self, y, classes):
        d = y - y.mean()
        return np.column_stack([d, d * d])

    def impurity(self, S):
        mean = S[..., 1] / S[..., 0]
        return np.maximum(S[..., 2] / S[..., 0] - mean * mean, 0.0) * self.shrink


class TestCustomComponents:
    def test_custom_splitter_reported_by_name_and_forest_predicts(self):
        X, y = _data()
        forest = fl.Forest(trees=4, splitter=PoissonLike(), rng=2).fit(X, y)
        with pytest.warns(fl.IncompleteForestWarning, match=r"custom splitter 'PoissonLike'"):
            loaded = _save_load(forest, include_data=True)
        assert isinstance(loaded.splitter, fl.StoredComponent)
        assert loaded.splitter.name == "PoissonLike" and loaded.splitter.attributes["shrink"] == 0.5
        assert loaded.splitter.attributes["helper"].startswith("<object")
        np.testing.assert_array_equal(loaded.predict(X), forest.predict(X))
        with pytest.raises(RuntimeError, match=r"custom splitter 'PoissonLike'.*components="):
            loaded.regrow(0)
        restored = _save_load(forest, include_data=True, components=[PoissonLike()])
        np.testing.assert_array_equal(restored.regrow(1).threshold, forest.tree(1).threshold)


class TestAtomicWrite:
    def test_failed_write_keeps_the_old_model(self, tmp_path, monkeypatch):
        X, score = _data()
        path = tmp_path / "model.npz"
        first = fl.Forest(trees=3, rng=0).fit(X, _labels("str", score))
        first.save(path)
        before = path.read_bytes()

        def broken_fsync(fd):
            raise OSError("disk full (simulated)")

        monkeypatch.setattr("forestlab.modelfile.container.os.fsync", broken_fsync)
        with pytest.raises(OSError, match=r"disk full"):
            fl.Forest(trees=5, rng=1).fit(X, score).save(path)
        assert path.read_bytes() == before and sorted(os.listdir(tmp_path)) == ["model.npz"]
        monkeypatch.undo()
        np.testing.assert_array_equal(fl.load(path).predict(X), first.predict(X))


# ---------------------------------------------------------------------------------------------- hostile files
def _members(blob):
    """The arrays and the decoded header of a model file (read here with NumPy's own .npy reader)."""
    with zipfile.ZipFile(io.BytesIO(blob)) as zf:
        arrays = {name[:-4]: np.lib.format.read_array(io.BytesIO(zf.read(name)), allow_pickle=False)
                  for name in zf.namelist()}
    header = json.loads(arrays.pop("header").tobytes().decode())
    return header, arrays


def _pack(header, arrays, raw=None, compress=False):
    """A model file from a header and arrays; ``raw`` maps member names to literal .npy bytes."""
    out = io.BytesIO()
    members = {"header": np.frombuffer(json.dumps(header).encode(), dtype=np.uint8), **arrays}
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED if compress else zipfile.ZIP_STORED) as zf:
        for name, value in members.items():
            buffer = io.BytesIO()
            np.lib.format.write_array(buffer, np.asanyarray(value), allow_pickle=True)
            zf.writestr(name + ".npy", buffer.getvalue())
        for name, value in (raw or {}).items():
            zf.writestr(name + ".npy", value)
    return out.getvalue()


def _load_bytes(blob):
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "m.npz")
        with open(path, "wb") as fh:
            fh.write(blob)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", fl.IncompleteForestWarning)
            return fl.load(path)


def _small_file(include_data=True):
    X, score = _data(n=40, p=3, seed=5)
    X[:, 2] = np.arange(40) % 5    # a categorical feature with five categories
    forest = fl.Forest(trees=3, depth_limit=3, rng=8, categorical=[2]).fit(X, _labels("str", score),
                                                          weights=np.linspace(0.5, 2, 40))
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "m.npz")
        forest.save(path, include_data=include_data)
        with open(path, "rb") as fh:
            return fh.read()


SMALL = _small_file()
PROBE = np.random.default_rng(0).normal(size=(25, 3))


def _inner(arrays):
    return int(np.flatnonzero(arrays["feature"] >= 0)[1])   # an inner node that is not a root


def _crafted(kind):
    header, arrays = _members(SMALL)
    k = _inner(arrays)
    raw = None
    if kind == "backward":
        arrays["left"][k] = k - 1
        arrays["right"][k] = k
    elif kind == "cycle":
        arrays["left"][k] = k
        arrays["right"][k] = k + 1
    elif kind == "right":
        arrays["right"][k] += 1
    elif kind == "feature":
        arrays["feature"][k] = 3
    elif kind == "class":
        arrays["value"][k] = 3.0
    elif kind == "threshold":
        arrays["threshold"][k] = np.inf
    elif kind == "shared-child":
        k2 = int(np.flatnonzero(arrays["feature"][:arrays["offsets"][1]] >= 0)[2])
        arrays["left"][k2], arrays["right"][k2] = arrays["left"][k], arrays["right"][k]
    elif kind == "huge-shape":
        header_bytes = io.BytesIO()
        np.lib.format.write_array_header_1_0(header_bytes, {"descr": "<f8", "fortran_order": False,
                                                            "shape": (2**40,)})
        raw = {"threshold": header_bytes.getvalue() + b"\0" * 64}
        del arrays["threshold"]
    elif kind == "huge-count":
        header["nodes"] = 10**15
    elif kind == "dtype":
        arrays["feature"] = arrays["feature"].astype(np.int64)
    elif kind == "pickle":
        arrays["classes"] = np.array(["high", "low", "mid"], dtype=object)
    elif kind == "version":
        header["format_version"] = 99
    elif kind == "extra":
        arrays["payload"] = np.zeros(3)
    elif kind == "missing":
        del arrays["inbag"]
    elif kind == "fingerprint":
        arrays["X"][0, 0] += 1.0
    elif kind == "entropy":
        header["seed"]["entropy"] = -1
    elif kind == "sampler":
        header["sampler"]["attributes"] = {"m": "all"}
    elif kind == "category-set":
        numeric = int(np.flatnonzero((arrays["feature"] >= 0) & (arrays["feature"] != 2))[0])
        arrays["category_left"][numeric, 0] = 5
    elif kind == "levels":
        arrays["level_values"][[0, 1]] = arrays["level_values"][[1, 0]]
    elif kind == "words":
        header["category_words"] = 2
        arrays["category_left"] = np.zeros((arrays["feature"].size, 2), dtype=np.uint64)
    elif kind == "nested":
        header["settings"] = json.loads("[" * 50 + "]" * 50)
    return _pack(header, arrays, raw=raw, compress=kind == "compressed")


CRAFTED = {
    "backward": r"points backward", "cycle": r"points backward", "right": r"right != left \+ 1",
    "feature": r"feature index lies outside -1 \.\. 2", "class": r"class index lies outside 0 \.\. 2",
    "threshold": r"thresholds must be finite", "shared-child": r"no parent or more than one|breadth-first order",
    "huge-shape": r"declares shape \(1099511627776,\)", "huge-count": r"member 'cases' is larger|must be",
    "dtype": r"member 'feature' must be <i4", "pickle": r"member 'classes' is not a plain C-ordered array",
    "version": r"format version 99 is not supported", "extra": r"differ from those its header implies",
    "missing": r"differ from those its header implies", "fingerprint": r"do not match their fingerprint",
    "entropy": r"seed must hold", "sampler": r"RandomSubset has invalid attributes",
    "nested": r"'settings' has the wrong type", "compressed": r"not a plain stored \.npy array",
    "category-set": r"does not split a categorical feature has a category set",
    "levels": r"strictly increasing", "words": r"category set width",
}


class TestLoaderRefuses:
    def test_valid_small_file_loads(self):
        forest = _load_bytes(SMALL)
        assert forest.per_tree(PROBE).shape == (3, 25)

    @pytest.mark.parametrize("kind", sorted(CRAFTED))
    def test_crafted_file(self, kind):
        with pytest.raises(fl.ModelFileError, match=CRAFTED[kind]):
            _load_bytes(_crafted(kind))

    def test_not_a_model_file(self):
        assert issubclass(fl.ModelFileError, ValueError)
        with pytest.raises(fl.ModelFileError, match=r"not a readable forestlab forest file"):
            _load_bytes(b"just some text, not a zip archive")
        with pytest.raises(fl.ModelFileError, match=r"no 'header' member"):
            buffer = io.BytesIO()
            np.savez(buffer, a=np.zeros(2))
            _load_bytes(buffer.getvalue())


def _outcome_is_clean(blob):
    """Loading gives either ModelFileError or a forest that predicts; anything else fails the test."""
    try:
        forest = _load_bytes(blob)
    except fl.ModelFileError:
        return
    out = forest.per_tree(PROBE)
    assert out.shape == (forest.trees, PROBE.shape[0])
    forest.predict(PROBE)


MUTABLE = ("feature", "threshold", "left", "right", "value", "cases", "decrease", "depth", "missing_left",
           "category_left", "level_features", "level_offsets", "level_values", "offsets", "inbag", "y",
           "case_weights")


class TestLoaderFuzz:
    @settings(max_examples=120)
    @given(st.integers(0, len(SMALL) - 1))
    def test_truncated(self, cut):
        _outcome_is_clean(SMALL[:cut])

    @settings(max_examples=150)
    @given(st.lists(st.integers(0, 8 * len(SMALL) - 1), min_size=1, max_size=6))
    def test_bit_flips(self, bits):
        blob = bytearray(SMALL)
        for bit in bits:
            blob[bit // 8] ^= 1 << (bit % 8)
        _outcome_is_clean(bytes(blob))

    @settings(max_examples=200)
    @given(st.sampled_from(MUTABLE), st.integers(0, 10**6),
           st.one_of(st.integers(-3, 40), st.integers(-(2**31), 2**31 - 1),
                     st.sampled_from([np.nan, np.inf, -0.0, 0.5, 1e300])))
    def test_crafted_values(self, name, where, value):
        header, arrays = _members(SMALL)
        target = arrays[name].reshape(-1)
        with np.errstate(all="ignore"):
            target[where % target.size] = np.array(value).astype(target.dtype)
        _outcome_is_clean(_pack(header, arrays))

    @settings(max_examples=150)
    @given(st.sampled_from(["trees", "nodes", "cases", "features", "feature_names", "classes", "settings",
                            "sampler", "splitter", "seed", "fingerprint", "has_data", "has_case_weights", "task",
                            "class_priors", "class_factors"]),
           st.one_of(st.none(), st.booleans(), st.integers(-5, 10**12), st.floats(allow_nan=False),
                     st.text(max_size=5), st.lists(st.integers(-2, 5), max_size=4),
                     st.dictionaries(st.sampled_from(["dtype", "count", "object", "name", "m", "entropy"]),
                                     st.one_of(st.integers(-1, 4), st.text(max_size=4), st.booleans()))))
    def test_crafted_header(self, key, value):
        header, arrays = _members(SMALL)
        header[key] = value
        _outcome_is_clean(_pack(header, arrays))

    @settings(max_examples=80)
    @given(st.sampled_from(MUTABLE + ("classes", "X")),
           st.sampled_from(["<i4", "<i8", "<f8", "<f4", "|u1", "|b1", "<U3", ">f8", "<c16"]),
           st.lists(st.integers(0, 5), max_size=3))
    def test_wrong_member_layout(self, name, dtype, shape):
        header, arrays = _members(SMALL)
        arrays[name] = np.zeros(shape, dtype=dtype)
        _outcome_is_clean(_pack(header, arrays))


class TestOutOfBagKept:
    """A forest saved without its training data keeps its out-of-bag results (issue: save and load)."""

    @pytest.mark.parametrize("task", ["classification", "regression"])
    def test_loaded_without_data_keeps_oob(self, tmp_path, task):
        rng = np.random.default_rng(21)
        X = rng.normal(size=(150, 4))
        y = (X[:, 0] > 0).astype(int) if task == "classification" else X[:, 0] + 0.1 * rng.normal(size=150)
        weights = rng.uniform(0.5, 2.0, 150) if task == "regression" else None
        forest = fl.Forest(trees=25, rng=4).fit(X, y, weights=weights)
        path = tmp_path / "kept.npz"
        forest.save(path)
        loaded = fl.load(path)
        a, b = forest.oob, loaded.oob
        for name in ("coverage", "error_curve", "margins", "votes", "class_index", "confusion", "by_class",
                     "residuals", "spread", "predictions", "observed"):
            x, z = getattr(a, name), getattr(b, name)
            if x is None:
                assert z is None
            elif x.dtype == object:
                assert x.tolist() == z.tolist()
            else:
                np.testing.assert_array_equal(x, z)
                assert x.dtype == z.dtype
        for name in ("error", "strength", "correlation", "error_bound", "explained_variance"):
            x, z = getattr(a, name), getattr(b, name)
            assert (x is None and z is None) or x == z or (np.isnan(x) and np.isnan(z))

    def test_tampered_oob_is_refused(self, tmp_path):
        X = np.random.default_rng(2).normal(size=(60, 2))
        forest = fl.Forest(trees=5, rng=1).fit(X, X[:, 0] > 0)
        path = tmp_path / "f.npz"
        forest.save(path)
        header, arrays = read_model(path)
        arrays["oob_coverage"] = arrays["oob_coverage"] + 99
        write_model(tmp_path / "g.npz", header, arrays)
        with pytest.raises(fl.ModelFileError, match="out-of-bag coverage"):
            fl.load(tmp_path / "g.npz")

    def test_no_data_no_stored_oob_gives_a_clear_error(self, tmp_path):
        X = np.random.default_rng(2).normal(size=(60, 2))
        forest = fl.Forest(trees=5, rng=1).fit(X, X[:, 0] > 0)
        path = tmp_path / "f.npz"
        forest.save(path)
        header, arrays = read_model(path)
        header["has_oob"] = False
        write_model(tmp_path / "g.npz", header, {k: v for k, v in arrays.items() if not k.startswith("oob_")})
        with pytest.raises(RuntimeError, match="loaded from a file without its training data"):
            fl.load(tmp_path / "g.npz").oob  # noqa: B018
