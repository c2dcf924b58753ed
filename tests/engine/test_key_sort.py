"""The radix sort of :mod:`forestlab.engine.key_sort` against NumPy's own sorts (``np.sort``,
``np.argsort(kind="stable")``: the reference library), and forests grown with either sort bit for bit equal.

Which sort a process uses is measured on the machine, so both are forced here (``MODE``, with
``RADIX_MIN = 1`` so that every sort of the engine takes the radix path).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import forestlab as fl
from example_samplers import FirstPlusOne
from forestlab.engine import key_sort

TREE_ARRAYS = ("feature", "threshold", "value", "cases", "impurity_decrease", "missing_left", "category_left")


@given(st.integers(1, 3_000), st.integers(1, 63), st.sampled_from([np.int64, np.uint64, np.uint32]),
       st.integers(0, 2**32))
def test_radix_sort_equals_numpy_sort(size, bits, dtype, seed):
    """Any non-negative keys below ``2**bits``, of every width the engine sorts, with and without repeats."""
    bits = min(bits, 32) if dtype == np.uint32 else bits
    rng = np.random.default_rng(seed)
    high = 1 << bits if seed % 3 else max(2, size // 4)  # every third draw: many equal keys
    key = rng.integers(0, min(high, 1 << bits), size, dtype=np.uint64).astype(dtype)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(key_sort, "MODE", "radix")
        mp.setattr(key_sort, "RADIX_MIN", 1)
        order = key_sort.stable_order(key, bits)
    np.testing.assert_array_equal(order, np.argsort(key, kind="stable"))


@given(st.lists(st.floats(allow_nan=False) | st.sampled_from([0.0, -0.0, np.inf, -np.inf, 5e-324, -5e-324]),
                min_size=2, max_size=40))
def test_float_keys_compare_as_the_values(values):
    """Keys and values compare alike pairwise (IEEE 754 comparison, ``-0.0 == 0.0``, as NumPy does), and
    NaNs of either sign get the largest key."""
    x = np.array(values)
    key = key_sort.float_keys(x)
    np.testing.assert_array_equal(key[:, None] < key[None, :], x[:, None] < x[None, :])
    np.testing.assert_array_equal(key[:, None] == key[None, :], x[:, None] == x[None, :])
    nan = key_sort.float_keys(np.array([np.nan, -np.nan, np.inf]))
    assert nan[0] == nan[1] == np.iinfo(np.uint64).max > nan[2]


@pytest.mark.parametrize("mode", ["numpy", "radix"])
def test_stable_order_keeps_ties_in_position_order(monkeypatch, mode):
    """Both ways (the packed ``np.sort`` and the radix sort), on keys of few distinct values."""
    monkeypatch.setattr(key_sort, "MODE", mode)
    monkeypatch.setattr(key_sort, "RADIX_MIN", 1)
    key = np.random.default_rng(3).integers(0, 5, 10_000)
    np.testing.assert_array_equal(key_sort.stable_order(key, 3), np.argsort(key, kind="stable"))


def test_mode_is_measured_once_and_can_be_fixed(monkeypatch):
    monkeypatch.setattr(key_sort, "MODE", None)
    monkeypatch.setattr(key_sort, "_measured", None)
    assert key_sort.sort_mode() in ("numpy", "radix")
    measured = key_sort._measured
    assert key_sort.sort_mode() == measured  # (not measured again)
    monkeypatch.setattr(key_sort, "MODE", "numpy")
    assert key_sort.sort_mode() == "numpy"
    assert not key_sort.radix_wanted(1 << 20, 40)


def _problems():
    rng = np.random.default_rng(7)
    n = 3_000
    X = rng.normal(size=(n, 6))
    y = (X[:, 0] + X[:, 1] ** 2 + rng.normal(size=n) > 1).astype(int)
    rounded = np.round(X, 1)  # ties
    target = 2 * X[:, 0] + np.sin(X[:, 2]) + rng.normal(size=n)
    classes = np.digitize(X[:, 0] + X[:, 3], np.linspace(-2, 2, 9))
    holes = X.copy()
    holes[rng.random(X.shape) < 0.05] = np.nan
    coded = X.copy()
    coded[:, 4] = rng.integers(0, 6, n)
    small = rng.normal(size=(600, 4))
    return {
        "two classes": (dict(trees=3, sampler=3), X, y),
        "entropy, min_leaf": (dict(trees=2, sampler=3, splitter="entropy", min_leaf=4), X, y),
        "two classes, ties": (dict(trees=2, sampler=3), rounded, y),
        "regression": (dict(trees=2, sampler=3, task="regression", min_leaf=5), X, target),
        "regression, ties": (dict(trees=2, sampler=3, task="regression"), rounded, target),
        "ten classes": (dict(trees=2, sampler=3), X, classes),
        "missing values": (dict(trees=2, sampler=3), holes, y),
        "categorical": (dict(trees=2, sampler=3, categorical=[4]), coded, classes),
        "batch of small trees": (dict(trees=12, sampler=2), small, (small[:, 0] > 0).astype(int)),
        "unequal candidates per node": (dict(trees=2, sampler=FirstPlusOne()), X, target),
    }


@pytest.mark.parametrize("problem", list(_problems()))
def test_forests_are_the_same_with_either_sort(monkeypatch, problem):
    """Every search path (two classes, squared error, many classes, missing values, categories, batches of
    trees, ties or none, a user's sampler giving nodes one or two candidates) grows the same trees bit for
    bit whichever sort the machine picks (the radix sort's items and ordered codes formed when read, and at
    once, as on large levels)."""
    from forestlab.engine import segments

    settings, X, y = _problems()[problem]
    monkeypatch.setattr(key_sort, "RADIX_MIN", 1)
    grown = {}
    for mode, lazy in (("numpy", 1 << 18), ("radix", 1 << 18), ("radix", 0)):
        monkeypatch.setattr(key_sort, "MODE", mode)
        monkeypatch.setattr(segments, "LAZY_ELEMENTS", lazy)
        grown[mode, lazy] = fl.Forest(rng=3, **settings).fit(X, y)
    for b in range(settings["trees"]):
        a = grown["numpy", 1 << 18].tree(b)
        for other in (grown["radix", 1 << 18].tree(b), grown["radix", 0].tree(b)):
            for name in TREE_ARRAYS:
                np.testing.assert_array_equal(getattr(a, name), getattr(other, name), err_msg=f"{problem}: {name}")
