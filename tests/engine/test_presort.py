"""The per-forest plan: dense ranks of every feature, checked against a brute-force definition.

The dense rank of a value is the number of distinct smaller values (common practice: "dense ranking", as in
SQL's DENSE_RANK); forestlab also gives every missing value (NaN) a rank of its own, above every number, in
row order, so missing cases sort last within a node and in a fixed order.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import forestlab as fl
from forestlab.engine import key_sort
from forestlab.engine.presort import dense_ranks


def brute_dense_ranks(column):
    numbers = np.unique(column[~np.isnan(column)])
    ranks = np.array([np.count_nonzero(numbers < v) for v in column])
    gaps = np.flatnonzero(np.isnan(column))
    ranks[gaps] = numbers.size + np.arange(gaps.size)
    return ranks


@pytest.mark.parametrize("mode", ["numpy", "radix"])
@given(values=st.lists(st.one_of(st.sampled_from([0.0, -0.0, 1.5, -2.0, 7.0, np.nan, -np.nan, np.inf, -np.inf]),
                                 st.floats(allow_nan=False), st.floats(-3, 3)), min_size=1, max_size=60))
def test_dense_ranks_equal_the_definition(mode, values):
    """Both value orders (``np.argsort`` and the radix sort of :func:`key_sort.float_keys`, forced from one
    value on), on any floats: both zeros, both infinities, NaNs of either sign, subnormals, extremes."""
    column = np.array(values, dtype=float)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(key_sort, "MODE", mode)
        mp.setattr(key_sort, "RADIX_MIN", 1)
        ranks = dense_ranks(column)
    assert ranks.dtype == np.int32
    np.testing.assert_array_equal(ranks, brute_dense_ranks(column))


def test_presort_ranks_every_column_of_a_strided_matrix():
    rng = np.random.default_rng(0)
    X = np.round(rng.normal(size=(50, 4)), 1)
    X[rng.random(X.shape) < 0.1] = np.nan
    forest = fl.Forest(trees=1, rng=0).fit(X, (X[:, 0] > 0).astype(int))
    data = forest._data
    for j in range(X.shape[1]):
        np.testing.assert_array_equal(data.dense[j], brute_dense_ranks(X[:, j]))
    assert data.dense_bits == int(data.dense.max()).bit_length()


@given(st.lists(st.lists(st.sampled_from([0.0, 1.5, -2.0, 7.0, 3.25, -0.5]), min_size=3, max_size=3),
                min_size=1, max_size=40))
def test_rows_in_value_order_ties_in_row_order(rows):
    """``order[j]`` against a brute-force ordering written here (sort the rows by value, ties by row index),
    and ``tie_free`` against its definition (no two cases share a value)."""
    from forestlab.engine.presort import presort

    X = np.array(rows, dtype=float)
    n, p = X.shape
    data = presort(X, np.zeros(n), np.zeros((n, 1)), 0)
    for j in range(p):
        expected = sorted(range(n), key=lambda i: (X[i, j], i))
        np.testing.assert_array_equal(data.order[j], expected)
        assert data.tie_free[j] == (np.unique(X[:, j]).size == n)


def test_no_table_of_rows_where_it_would_not_pay():
    """The table of rows in value order is formed only without missing values and while it is small."""
    from forestlab.engine.presort import ORDER_TABLE_BYTES, presort

    X = np.arange(12.0).reshape(4, 3)
    assert presort(X, np.zeros(4), np.zeros((4, 1)), 0).order is not None
    X[1, 1] = np.nan
    assert presort(X, np.zeros(4), np.zeros((4, 1)), 0).order is None
    n = ORDER_TABLE_BYTES // 4 + 1  # one column whose table would take more than the limit
    assert presort(np.zeros((n, 1)), np.zeros(n), np.zeros((n, 1)), 0).order is None


def test_narrow_tables_hold_every_rank_and_row():
    """Ranks and rows as uint16 up to 65 536 rows (the largest rank and row, 65 535, kept exactly), int32
    from 65 537 on; both against an argsort written here."""
    from forestlab.engine.presort import presort, sorted_rows

    rng = np.random.default_rng(3)
    for n, kind in ((1 << 16, np.uint16), ((1 << 16) + 1, np.int32)):
        X = rng.permutation(n).astype(float)[:, None]
        data = presort(X, np.zeros(n), np.zeros((n, 1)), 0)
        assert data.dense.dtype == kind
        np.testing.assert_array_equal(data.dense[0], X[:, 0].astype(np.int64))
        order = sorted_rows(data.dense)
        assert order.dtype == kind
        np.testing.assert_array_equal(order[0], np.argsort(X[:, 0], kind="stable"))
