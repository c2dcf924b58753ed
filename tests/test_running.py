"""Running sums restarted at every segment: against plain per-segment sums, and independent of the batch.

The references are written here: a Python loop of ``np.cumsum`` over each segment (the definition of a
running sum), and, for the floating-point path, the same tree's sums computed with and without other
trees in the batch (forestlab's rule: a tree's arithmetic never depends on its batch).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from forestlab._running import prefix_sum, running_sums


@st.composite
def segmented(draw, integer):
    sizes = draw(st.lists(st.integers(1, 40), min_size=1, max_size=12))
    trees = np.sort(draw(st.lists(st.integers(0, 2), min_size=len(sizes), max_size=len(sizes))))
    element = st.integers(0, 1000) if integer else st.floats(-1e3, 1e3, allow_subnormal=False)
    values = np.array(draw(st.lists(element, min_size=sum(sizes), max_size=sum(sizes))))
    start = np.cumsum(sizes) - sizes
    return values, start, trees


def per_segment(values, start):
    bounds = np.append(start, values.size)
    return np.concatenate([np.cumsum(values[a:b]) for a, b in zip(bounds[:-1], bounds[1:])])


@given(segmented(integer=True))
def test_integer_running_sums_are_exact(case):
    values, start, trees = case
    expected = per_segment(values, start)
    left, totals = running_sums(values.copy(), start, trees)
    np.testing.assert_array_equal(left, expected)
    np.testing.assert_array_equal(totals, np.add.reduceat(values, start))


@given(segmented(integer=False))
def test_float_running_sums_restart_at_every_segment(case):
    values, start, trees = case
    left, _ = running_sums(values.copy(), start, trees)
    with np.errstate(under="ignore"):  # a bound for tiny values may underflow; the sums themselves do not
        bound = 4 * values.size * np.finfo(float).eps * np.abs(values).sum()  # summation error, common practice
    np.testing.assert_allclose(left, per_segment(values, start), rtol=0, atol=bound + 1e-300)


@given(segmented(integer=False))
def test_a_tree_sums_alike_alone_and_batched(case):
    values, start, trees = case
    left, _ = running_sums(values.copy(), start, trees)
    bounds = np.append(start, values.size)
    for t in np.unique(trees):
        mine = np.flatnonzero(trees == t)
        lo, hi = bounds[mine[0]], bounds[mine[-1] + 1]
        alone, _ = running_sums(values[lo:hi].copy(), start[mine] - lo, trees[mine])
        assert alone.tobytes() == left[lo:hi].tobytes()


@given(st.lists(st.floats(-1e6, 1e6, allow_subnormal=False), max_size=200), st.booleans())
def test_prefix_sum_equals_cumsum(values, in_place):
    x = np.array(values, dtype=float)
    expected = np.cumsum(x)
    out = x if in_place else np.empty_like(x)
    with np.errstate(under="ignore"):  # a bound for tiny values may underflow; the sums themselves do not
        bound = 2 * x.size * np.finfo(float).eps * np.abs(x).sum()  # both within (n - 1) eps sum|x| of exact
    got = prefix_sum(x.copy() if not in_place else x, out)
    np.testing.assert_allclose(got, expected, rtol=0, atol=bound + 1e-300)


@pytest.mark.parametrize("size", [4095, 4096, 4097, 5003, 8191, 65_536])
def test_blocked_prefix_sum_of_long_arrays(size):
    # long arrays take the blocked path (short ones a plain cumsum); the same error bound holds
    x = np.random.default_rng(size).normal(size=size) * 100
    bound = 2 * x.size * np.finfo(float).eps * np.abs(x).sum()
    for out in (np.empty_like(x), None):
        got = prefix_sum(x.copy(), np.empty_like(x)) if out is not None else prefix_sum(y := x.copy(), y)
        np.testing.assert_allclose(got, np.cumsum(x), rtol=0, atol=bound)
