"""Running sums restarted at every segment: against plain per-segment sums, and independent of the batch.

The references are written here: a Python loop of ``np.cumsum`` over each segment (the definition of a
running sum), and, for the floating-point path, the same tree's sums computed with and without other
trees in the batch (forestlab's rule: a tree's arithmetic never depends on its batch), and computed in one
call or in blocks of consecutive segments continued by a ``Carry`` (a level searched in blocks).
"""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from forestlab.engine.running import Carry, running_sums


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


@given(segmented(integer=True), st.data())
def test_complex_running_sums_carry_two_channels(case, data):
    # the squared-error search packs an integer weight W and a float sum S as W + 1j * S: the real part must
    # come out exact and the imaginary part within the usual summation error of per-segment sums
    weights, start, trees = case
    sums = np.array(data.draw(st.lists(st.floats(-1e3, 1e3, allow_subnormal=False), min_size=weights.size,
                                       max_size=weights.size)))
    left, totals = running_sums(weights + 1j * sums, start, trees)
    np.testing.assert_array_equal(left.real, per_segment(weights, start))
    np.testing.assert_array_equal(totals.real, np.add.reduceat(weights, start))
    with np.errstate(under="ignore"):
        bound = 4 * sums.size * np.finfo(float).eps * np.abs(sums).sum()  # summation error, common practice
    np.testing.assert_allclose(left.imag, per_segment(sums, start), rtol=0, atol=bound + 1e-300)


@given(segmented(integer=False), st.data())
def test_sums_in_blocks_of_segments_continued_by_a_carry_equal_one_call(case, data):
    values, start, trees = case
    cuts = sorted(set(data.draw(st.lists(st.integers(1, max(1, start.size - 1)), max_size=4)))) \
        if start.size > 1 else []
    bounds = np.append(start, values.size)
    for packed in (values, np.round(values) + 1j * values[::-1]):  # float, and complex as squared error packs
        whole, totals = running_sums(packed.copy(), start, trees)
        carry, left, total = Carry(), [], []
        for a, b in zip([0, *cuts], [*cuts, start.size]):
            lo, hi = bounds[a], bounds[b]
            part, part_totals = running_sums(packed[lo:hi].copy(), start[a:b] - lo, trees[a:b], carry=carry)
            left.append(part)
            total.append(part_totals)
        assert np.concatenate(left).tobytes() == whole.tobytes()
        assert np.concatenate(total).tobytes() == totals.tobytes()


def test_without_the_carry_blocks_round_differently():
    # the carry is needed: the sums of a segment continue, rounded, from those of the segment before it
    rng = np.random.default_rng(4)
    values = rng.normal(size=400) * 10.0 ** rng.integers(-3, 4, size=400)
    start, trees = np.arange(0, 400, 20), np.zeros(20, dtype=np.int64)
    whole, _ = running_sums(values.copy(), start, trees)
    apart = np.concatenate([running_sums(values[lo:lo + 100].copy(), start[:5], trees[:5])[0]
                            for lo in range(0, 400, 100)])
    assert apart.tobytes() != whole.tobytes()
