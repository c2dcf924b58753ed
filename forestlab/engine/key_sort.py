"""The stable order of non-negative integer keys: by NumPy's ``np.sort`` of packed (key, position) keys, or by
a least-significant-digit radix sort, whichever this machine runs faster.

Every level of every tree sorts its packed keys (:mod:`.segments`), and on some CPUs NumPy's SIMD sort is far
slower than on others with the same caches: on an AMD EPYC of family 25 model 17, where NumPy 2.4.6 dispatches
its AVX-512 kernels, ``np.sort`` of 64-bit keys took 25-51 ns an element (10 000 to 1 000 000 keys) against
8-11 ns for the AVX2 kernels on the same machine (``NPY_DISABLE_CPU_FEATURES``), and 6.5 ns on an AMD EPYC of
family 26. The radix sort is ``np.lexsort`` of the keys' 16-bit digits, lowest first: NumPy sorts 16-bit keys
stably by counting (a counting pass per byte), in time linear in the keys, without SIMD kernels.

The presort ranks each feature's float values through :func:`value_order`, which on such a machine sorts
:func:`float_keys` (the values' bits as order-preserving integers) the same way.

Both give the same result: a stable order is unique, ties in position order. Which one runs is measured once
per process, on the first call with at least :data:`RADIX_MIN` keys (:func:`sort_mode`; a few milliseconds),
so results never depend on it, only the time. :data:`MODE` fixes it instead (``"numpy"`` or ``"radix"``;
tests and benchmarks).
"""

from __future__ import annotations

import time

import numpy as np
from numpy.typing import NDArray

__all__ = ["MODE", "RADIX_MIN", "float_keys", "radix_wanted", "sort_mode", "stable_order", "value_order"]

#: "numpy", "radix", or None: measured once, on the first call with at least :data:`RADIX_MIN` keys
MODE: str | None = None

#: Fewer keys than this always take ``np.sort`` (a radix sort's passes cost a fixed few microseconds each)
RADIX_MIN = 4096

#: Bits of one radix digit (NumPy's stable sort counts keys of at most 16 bits)
DIGIT_BITS = 16

_measured: str | None = None


def stable_order(key: NDArray, bits: int) -> NDArray[np.intp]:
    """``np.argsort(key, kind="stable")`` for non-negative integer keys below ``2**bits``: by the radix sort,
    or by one ``np.sort`` of ``key << index_bits | index`` where that fits 63 bits, in ``uint32`` where it fits
    32 (half the bytes; a stable ``argsort`` of keys wider than 16 bits is a merge sort: 270 against 10 ns an
    element for 40 000 keys, AMD EPYC, loaded).

    Examples
    --------
    >>> import numpy as np
    >>> stable_order(np.array([2, 0, 2, 1]), 2)
    array([1, 3, 0, 2])
    """
    if radix_wanted(key.size, bits):
        return _radix_order(key, bits)
    index_bits = max(1, (key.size - 1).bit_length())
    if key.size == 0 or bits + index_bits > 63:
        return np.argsort(key, kind="stable")
    dtype = np.uint32 if bits + index_bits <= 32 else np.int64
    packed = np.left_shift(key, index_bits, dtype=dtype, casting="unsafe")  # (non-negative keys)
    packed |= np.arange(key.size, dtype=dtype)
    packed.sort()
    return np.bitwise_and(packed, (1 << index_bits) - 1, out=packed if dtype == np.intp else None, dtype=np.intp)


def value_order(column: NDArray[np.float64]) -> NDArray[np.intp]:
    """An order of ``column`` (float64) by increasing value, NaNs last in position order; equal values in an
    unspecified order. ``np.argsort(column)``, or, where :func:`sort_mode` picked the radix sort, the stable
    order of :func:`float_keys` (its four 16-bit digits: 28 against 50 ns a value for 100 000 values, 43
    against 73 for a million, AMD EPYC family 25 model 17, where ``np.argsort`` of floats takes NumPy's
    AVX-512 kernels).

    Examples
    --------
    >>> import numpy as np
    >>> value_order(np.array([2.5, np.nan, -1.0, 0.0]))
    array([2, 3, 0, 1])
    """
    if radix_wanted(column.size, 64):
        return _radix_order(float_keys(column), 64)
    return np.argsort(column)


def float_keys(column: NDArray[np.float64]) -> NDArray[np.uint64]:
    """``uint64`` keys in the order of the float64 values: equal values (``-0.0`` and ``0.0`` too) get equal
    keys, and every NaN the largest key, above ``inf`` (the IEEE 754 bit patterns with the sign bit set for
    non-negative numbers and every bit inverted for negative ones: common practice for radix sorts of
    floating-point numbers).

    Examples
    --------
    >>> import numpy as np
    >>> keys = float_keys(np.array([-np.inf, -1.0, -0.0, 0.0, 2.0, np.inf, np.nan]))
    >>> bool(np.all(keys[:-1] <= keys[1:])), bool(keys[2] == keys[3])
    (True, True)
    """
    key = np.add(column, 0.0).view(np.uint64)  # (-0.0 + 0.0 is 0.0)
    flip = np.right_shift(key, np.uint64(63))
    np.negative(flip, out=flip)  # all ones for negative numbers, else 0 (modular)
    flip |= np.uint64(1 << 63)
    key ^= flip
    # NaNs: above the key of inf (positive sign) or below that of -inf (negative sign)
    nan = key > _INF_KEY
    nan |= key < _NEG_INF_KEY
    np.putmask(key, nan, np.iinfo(np.uint64).max)
    return key


#: :func:`float_keys` of inf and -inf
_INF_KEY, _NEG_INF_KEY = np.uint64(0xFFF0_0000_0000_0000), np.uint64(0x000F_FFFF_FFFF_FFFF)


def sort_mode() -> str:
    """``"numpy"`` or ``"radix"``: :data:`MODE` if set, else the faster of the two on this machine (measured
    on the first call: :func:`_measure`)."""
    global _measured
    if MODE is not None:
        return MODE
    if _measured is None:
        _measured = _measure()
    return _measured


def radix_wanted(size: int, bits: int) -> bool:
    """Whether ``size`` keys below ``2**bits`` take the radix sort."""
    return size >= RADIX_MIN and 0 < bits <= 64 and sort_mode() == "radix"


def _radix_order(key: NDArray, bits: int) -> NDArray[np.intp]:
    """The stable order of ``key`` by ``np.lexsort`` of its 16-bit digits (lowest first: lexsort's last key
    is its primary one). The digits are a temporary of their own, not a scratch buffer: a level's sort
    should leave nothing resident beyond its result (working memory)."""
    digits = max(1, -(-bits // DIGIT_BITS))
    buffer = np.empty((digits, key.size), dtype=np.uint16)
    for d in range(digits):
        np.right_shift(key, d * DIGIT_BITS, out=buffer[d], casting="unsafe")  # (the low 16 bits kept)
    return np.lexsort(buffer)


def _measure(repeats: int = 3, size: int = 1 << 14) -> str:
    """Time both sorts on keys shaped like a level's (runs of increasing segment numbers above random
    17-bit ranks, ``size`` keys), alternating, best of ``repeats`` each; the radix sort must win by 15%.
    About 2.5 ms at 2**14 keys (15 ms at 2**16; AMD EPYC family 25 model 17)."""
    rng = np.random.default_rng(12345)
    rank_bits = 17
    segment = np.repeat(np.arange(64), size // 64) << rank_bits
    key = segment + rng.integers(0, 1 << rank_bits, size)
    bits = int(key.max()).bit_length()
    best = {"numpy": np.inf, "radix": np.inf}
    for _ in range(repeats):
        for mode in best:
            copy = key.copy()
            start = time.perf_counter()
            if mode == "numpy":
                copy.sort()
            else:
                copy.take(_radix_order(copy, bits))
            best[mode] = min(best[mode], time.perf_counter() - start)
    return "radix" if best["radix"] < 0.85 * best["numpy"] else "numpy"
