"""Data frames, case weights, class priors and the class-balanced bootstrap."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import forestlab as fl

NODE_ARRAYS = ("feature", "threshold", "left", "right", "value", "cases", "impurity_decrease", "depth",
               "missing_left", "category_left")


def _problem(n=120, p=3, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    return X, np.where(X[:, 0] + 0.5 * X[:, 1] > 0, "ok", "bad")


class DuckFrame:
    """A minimal table that is not pandas: named columns and ``to_numpy``."""

    def __init__(self, columns, values):
        self.columns = list(columns)
        self._values = np.asarray(values)

    def to_numpy(self, dtype=None, na_value=None):
        return self._values.astype(dtype) if dtype is not None else self._values

    def __getitem__(self, names):
        return DuckFrame(names, self._values[:, [self.columns.index(c) for c in names]])


class TestFrames:
    def test_validation(self):
        pd = pytest.importorskip("pandas")
        X, y = _problem()
        df = pd.DataFrame(X, columns=["a", "b", "c"])
        with pytest.raises(ValueError, match=r"`X` has repeated column names \['a'\]"):
            fl.Forest(trees=2).fit(df.set_axis(["a", "a", "c"], axis=1), y)
        coloured = df.assign(colour=pd.Categorical(["red", "blue"] * 60), note=["x"] * 120)
        with pytest.raises(TypeError, match=r"non-numeric column\(s\) \['note'\].*astype\(\"category\"\)"):
            fl.Forest(trees=2).fit(coloured, y)
        # encoded as numbers, a category column is named in `categorical=` (matched to the frame's names)
        codes = coloured.assign(colour=coloured["colour"].cat.codes.astype(float)).drop(columns="note")
        forest = fl.Forest(trees=3, rng=0, categorical=["colour"]).fit(codes, y)
        assert list(forest._view.levels) == [3] and forest.feature_names[3] == "colour"
        forest = fl.Forest(trees=3, rng=0).fit(df, y)
        with pytest.raises(ValueError, match=r"3 features seen in fit; missing \['c'\]$"):
            forest.predict(df[["a", "b"]])
        with pytest.raises(ValueError, match=r"missing \['c'\] and unexpected \['z'\]"):
            forest.predict(df.rename(columns={"c": "z"}))
        with pytest.raises(ValueError, match=r"unexpected \['extra'\]"):
            forest.predict(df.assign(extra=1.0))

    def test_category_columns_are_categorical_and_coded_by_label(self, tmp_path):
        pd = pytest.importorskip("pandas")
        rng = np.random.default_rng(4)
        supplier = rng.choice(["acme", "borealis", "cobalt"], 300)
        y = np.where(supplier == "borealis", "rework", "pass")
        frame = pd.DataFrame({"supplier": pd.Categorical(supplier), "noise": rng.normal(size=300)})
        forest = fl.Forest(trees=20, rng=0).fit(frame, y)
        assert list(forest._view.levels) == [0]
        assert forest.oob.error == 0.0
        # a new frame with its own category order, an unseen label and a missing one
        new = pd.DataFrame({"noise": [0.0, 0.0, 0.0, 0.0],
                            "supplier": pd.Categorical(["borealis", "acme", "zephyr", None],
                                                       categories=["zephyr", "borealis", "acme"])})
        predicted = forest.predict(new)
        assert predicted[:2].tolist() == ["rework", "pass"]
        # unseen and missing labels take the same (missing-value) path in every tree
        np.testing.assert_array_equal(forest.per_tree(new)[:, 2], forest.per_tree(new)[:, 3])
        forest.add_trees(frame, y, trees=2)
        path = tmp_path / "suppliers.npz"
        forest.save(path)
        np.testing.assert_array_equal(fl.load(path).predict(new), forest.predict(new))

    def test_names_and_matching(self):
        pd = pytest.importorskip("pandas")
        X, y = _problem()
        df = pd.DataFrame(X, columns=["temp", "load", "speed"])
        forest = fl.Forest(trees=10, rng=3).fit(df, y)
        assert forest.feature_names == ("temp", "load", "speed")
        # a frame is matched by name, whatever the column order; an array by position
        np.testing.assert_array_equal(forest.per_tree(df[["speed", "temp", "load"]]), forest.per_tree(X))
        plain = fl.Forest(trees=10, rng=3).fit(X, y)
        assert plain.feature_names == ("x0", "x1", "x2")
        for a, b in zip(plain._view.trees, forest._view.trees):
            np.testing.assert_array_equal(a.threshold, b.threshold)
        mixed = df.assign(flag=np.arange(120) % 2 == 0, count=pd.array(np.arange(120), dtype="Int64"))
        assert fl.Forest(trees=2, rng=0).fit(mixed, y).feature_names[-2:] == ("flag", "count")
        gappy = fl.Forest(trees=2).fit(mixed.assign(count=pd.array([None] + [1] * 119, dtype="Int64")), y)
        assert np.isnan(gappy._data.X[0, -1])   # pandas' NA is a missing value (NaN)

    def test_duck_typed_table(self):
        X, y = _problem()
        table = DuckFrame(["u", "v", "w"], X)
        forest = fl.Forest(trees=5, rng=1).fit(table, y)
        assert forest.feature_names == ("u", "v", "w")
        np.testing.assert_array_equal(forest.per_tree(table[["w", "u", "v"]]), forest.per_tree(X))


def _trees_equal(a, b, exact=True):
    for name in NODE_ARRAYS:
        x, z = getattr(a, name), getattr(b, name)
        if exact or name in ("feature", "threshold", "left", "right", "depth", "cases", "missing_left",
                                  "category_left"):
            np.testing.assert_array_equal(x, z, err_msg=name)
        else:
            np.testing.assert_allclose(x, z, rtol=1e-9, atol=1e-9, err_msg=name)


@st.composite
def weighted_problems(draw):
    n = draw(st.integers(3, 25))
    p = draw(st.integers(1, 3))
    X = np.array(draw(st.lists(st.lists(st.integers(0, 5), min_size=p, max_size=p), min_size=n, max_size=n)),
                 dtype=float) * 0.7
    kind = draw(st.sampled_from(["gini", "entropy", "squared_error"]))
    if kind == "squared_error":
        y = np.array(draw(st.lists(st.integers(-3, 3), min_size=n, max_size=n)), dtype=float) * 0.5
    else:
        y = np.array(draw(st.lists(st.integers(0, 2), min_size=n, max_size=n)))
    w = np.array(draw(st.lists(st.integers(1, 4), min_size=n, max_size=n)))
    return X, y, w, kind, draw(st.sampled_from([1, 2, 3])), draw(st.sampled_from([None, 2]))


class TestWeights:
    def test_validation(self):
        X, y = _problem(n=10)
        forest = fl.Forest(trees=2)
        for bad, err, msg in [(np.ones(9), ValueError, r"one weight per case \(10\); got shape \(9,\)"),
                              (np.r_[np.ones(9), -1.0], ValueError, r"finite and >= 0; 1 are not, first at row 9"),
                              (np.r_[np.ones(9), np.nan], ValueError, r"finite and >= 0"),
                              (np.ones(10, bool), TypeError, r"real numbers .* got dtype bool"),
                              (["a"] * 10, TypeError, r"real numbers")]:
            with pytest.raises(err, match=r"^`weights` .*" + msg):
                forest.fit(X, y, weights=bad)

    @settings(max_examples=50)
    @given(weighted_problems())
    def test_integer_weights_equal_duplicated_rows(self, problem):
        # Integer case weights act as replication counts (Breiman, Friedman, Olshen & Stone 1984, CART,
        # section 4.1: node sums are sums over cases; common practice). With every case in-bag once
        # (no replacement, sample_size = n) and min_leaf counted in weighted cases, the tree on weighted
        # data must be the tree on the data with row i repeated w_i times.
        X, y, w, kind, min_leaf, depth_limit = problem
        options = dict(trees=1, sampler=fl.AllFeatures(), splitter=kind, min_leaf=min_leaf, replace=False,
                       depth_limit=depth_limit, rng=0)
        import warnings
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", fl.SingleClassWarning)
            weighted = fl.Forest(sample_size=len(y), **options).fit(X, y, weights=w)
            repeated = fl.Forest(sample_size=int(w.sum()), **options).fit(np.repeat(X, w, axis=0), np.repeat(y, w))
        _trees_equal(weighted.tree(0), repeated.tree(0), exact=kind != "squared_error")
        assert weighted.inbag.max() == 1

    def test_weights_multiply_counts_in_leaf_values(self):
        # A root-only tree predicts the weighted mean sum(c_i w_i y_i) / sum(c_i w_i) (definition).
        rng = np.random.default_rng(4)
        X, y = rng.normal(size=(50, 2)), rng.normal(size=50)
        w = rng.uniform(0.01, 3, size=50)
        forest = fl.Forest(trees=4, depth_limit=0, rng=2).fit(X, y, weights=w)
        plain = fl.Forest(trees=4, depth_limit=0, rng=2).fit(X, y)
        np.testing.assert_array_equal(forest.inbag, plain.inbag)   # draws do not depend on the weights
        for b in range(4):
            c = forest.inbag[b]
            np.testing.assert_allclose(forest.tree(b).value[0], np.average(y, weights=c * w), rtol=1e-12)
            np.testing.assert_allclose(forest.tree(b).cases[0], np.sum(c * w), rtol=1e-7)   # stored as float32
        np.testing.assert_array_equal(forest.case_weights, w)
        assert not forest.case_weights.flags.writeable and plain.case_weights is None


class TestClassPriors:
    def test_validation(self):
        X, y = _problem(n=20)
        with pytest.raises(ValueError, match=r"`class_priors` must be None, 'equal' or a dict"):
            fl.Forest(class_priors="balanced")
        with pytest.raises(TypeError, match=r"`class_priors` must be None, 'equal' or a dict"):
            fl.Forest(class_priors=[1, 2])
        with pytest.raises(ValueError, match=r"positive finite numbers; got -1 for 'ok'"):
            fl.Forest(class_priors={"ok": -1})
        with pytest.raises(ValueError, match=r"names 'maybe', which are not classes of `y` and gives no prior for "
                                             r"'bad' \(the classes: \['bad', 'ok'\]\)"):
            fl.Forest(trees=2, class_priors={"maybe": 0.5, "ok": 0.5}).fit(X, y)
        with pytest.raises(ValueError, match=r"`class_priors` needs weight in every class, but the cases of 'bad'"):
            fl.Forest(trees=2, class_priors="equal").fit(X, y, weights=(y == "ok").astype(float))
        with pytest.raises(ValueError, match=r"`balance` and `class_priors` are for classification"):
            fl.Forest(trees=2, class_priors="equal").fit(X, X[:, 0])
        with pytest.raises(ValueError, match=r"`balance` and `class_priors` are for classification"):
            fl.Forest(balance="classes", task="regression")

    @pytest.mark.parametrize("with_case_weights", [False, True])
    def test_every_root_holds_the_classes_in_the_shares_of_the_priors(self, with_case_weights):
        """The definition of priors (Breiman, Friedman, Olshen & Stone 1984, CART, chapter 4: node
        probabilities p(k|t) proportional to pi_k N_k(t) / N_k): with every case drawn once, class k carries
        the share pi_k of the root's weight, whatever the class sizes and case weights."""
        X, y = _problem(n=150, seed=5)
        y[:100] = "ok"
        w = np.random.default_rng(3).uniform(0.5, 2.0, size=y.size) if with_case_weights else None
        for spec, expected in [({"bad": 2.0, "ok": 3.0}, {"bad": 0.4, "ok": 0.6}), ("equal", {"bad": 0.5, "ok": 0.5})]:
            forest = fl.Forest(trees=3, class_priors=spec, replace=False, sample_size=1.0, rng=9).fit(X, y, w)
            assert forest.class_priors == pytest.approx(expected)
            grown = forest._data.weights   # case weight x class factor of every case
            for label, prior in expected.items():
                assert grown[y == label].sum() / grown.sum() == pytest.approx(prior, rel=1e-12)
            np.testing.assert_allclose(forest.tree(0).cases[0], grown.sum(), rtol=1e-6)   # root weight
        by_case = fl.Forest(trees=3, replace=False, sample_size=1.0, rng=9).fit(X, y, weights=grown)
        for a, b in zip(forest._view.trees, by_case._view.trees):
            _trees_equal(a, b)

    def test_equal_priors_weigh_each_case_n_over_k_n_k(self):
        """Without case weights equal priors give class k the factor n / (K n_k) (common practice), exactly."""
        X, y = _problem(n=150, seed=5)
        y[:100] = "ok"
        n_k = np.array([np.sum(y == "bad"), np.sum(y == "ok")])
        forest = fl.Forest(trees=6, class_priors="equal", rng=9).fit(X, y)
        assert forest._grown.class_factors == {"bad": 150 / (2 * n_k[0]), "ok": 150 / (2 * n_k[1])}
        by_case = fl.Forest(trees=6, rng=9).fit(X, y, weights=np.where(y == "bad", 150 / (2 * n_k[0]),
                                                                       150 / (2 * n_k[1])))
        for a, b in zip(forest._view.trees, by_case._view.trees):
            _trees_equal(a, b)


class TestBalance:
    def test_validation(self):
        X, y = _problem(n=40)
        with pytest.raises(ValueError, match=r"`balance` must be None or one of \['classes'\]; got 'yes'"):
            fl.Forest(balance="yes")
        with pytest.raises(ValueError, match=r"`sample_size` = 1 leaves no draw per class for 2 classes"):
            fl.Forest(trees=2, balance="classes", sample_size=1).fit(X, y)
        smallest = min(np.sum(y == "ok"), np.sum(y == "bad"))
        with pytest.raises(ValueError, match=rf"asks {smallest + 1} distinct cases .* smallest class has {smallest}"):
            fl.Forest(trees=2, balance="classes", replace=False, sample_size=2 * smallest + 2).fit(X, y)

    @pytest.mark.parametrize("replace", [True, False])
    def test_every_tree_draws_each_class_equally(self, replace):
        X, y = _problem(n=200, seed=2)
        y[:150] = "ok"
        n_min = min(np.sum(y == "ok"), np.sum(y == "bad"))
        forest = fl.Forest(trees=30, balance="classes", replace=replace, rng=4).fit(X, y)
        assert forest.sample_size == 2 * n_min
        for label in ("ok", "bad"):
            np.testing.assert_array_equal(forest.inbag[:, y == label].sum(axis=1), n_min)
        if not replace:
            assert forest.inbag.max() == 1 and np.all(forest.inbag[:, y == "bad"] == 1) == (n_min == np.sum(y == "bad"))
        # each tree drew from its own generator only: regrown alone, it is the same tree
        for b in (0, 17):
            _trees_equal(forest.regrow(b), forest.tree(b))
        half = fl.Forest(trees=30, balance="classes", replace=replace, rng=4, sample_size=0.25).fit(X, y)
        assert half.sample_size == 50 and np.all(half.inbag[:, y == "bad"].sum(axis=1) == 25)

    @pytest.mark.slow
    def test_minority_error_falls_on_imbalanced_problem(self):
        # Chen, Liaw & Breiman (2004), "Using random forest to learn imbalanced data" (UC Berkeley
        # Statistics technical report 666): drawing each tree's sample balanced over the classes raises the
        # accuracy on the minority class markedly. Synthetic 1:20 problem (1000 : 50 training cases, two
        # shifted Gaussian features among five), judged on 20000 independent test cases. Measured here:
        # minority-class error 0.858 (plain forest) -> 0.248 (balanced), majority error 0.004 -> 0.170.
        def draw(n0, n1, rng):
            X0, X1 = rng.normal(size=(n0, 5)), rng.normal(size=(n1, 5))
            X1[:, :2] += 1.25
            return np.vstack([X0, X1]), np.r_[np.zeros(n0, int), np.ones(n1, int)]

        X, y = draw(1000, 50, np.random.default_rng(11))
        X_test, y_test = draw(10000, 10000, np.random.default_rng(12))
        minority = y_test == 1
        plain = fl.Forest(trees=100, rng=5).fit(X, y).predict(X_test)
        balanced = fl.Forest(trees=100, rng=5, balance="classes").fit(X, y).predict(X_test)
        plain_error, balanced_error = np.mean(plain[minority] != 1), np.mean(balanced[minority] != 1)
        assert plain_error > 0.6
        assert balanced_error < 0.4
        assert balanced_error < 0.5 * plain_error


class TestZeroWeights:
    def test_zero_weight_equals_dropping_the_row(self):
        # common practice: a case of weight 0 contributes nothing to any sum, so the tree grown with it equals
        # the tree grown without its row (whole sample, no bootstrap, all features)
        rng = np.random.default_rng(12)
        X = rng.normal(size=(80, 3))
        y = (X[:, 0] + X[:, 1] > 0).astype(int)
        w = np.ones(80)
        w[::7] = 0.0
        keep = w > 0
        settings = dict(trees=1, sampler=fl.AllFeatures(), replace=False, rng=0)
        with_zero = fl.Forest(sample_size=80, **settings).fit(X, y, weights=w).tree(0)
        dropped = fl.Forest(sample_size=int(keep.sum()), **settings)
        # the same rows enter both trees: compare on a forest whose only sample is the kept rows
        tree = dropped.fit(X[keep], y[keep]).tree(0)
        for name in ("feature", "threshold", "left", "value", "cases"):
            np.testing.assert_array_equal(getattr(with_zero, name), getattr(tree, name))

    def test_validation(self):
        X = np.zeros((10, 2))
        y = np.arange(10) % 2
        with pytest.raises(ValueError, match=r"`weights` must be finite and >= 0; 1 are not, first at row 3"):
            fl.Forest(trees=2).fit(X, y, weights=np.where(np.arange(10) == 3, -1.0, 1.0))
        with pytest.raises(ValueError, match=r"`weights` are all zero"):
            fl.Forest(trees=2).fit(X, y, weights=np.zeros(10))
