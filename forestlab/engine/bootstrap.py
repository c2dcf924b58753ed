"""Bootstrap samples as per-case in-bag counts."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

__all__ = ["balanced_sample_size", "draw_balanced_counts", "draw_counts", "MAX_COUNT"]

MAX_COUNT = np.iinfo(np.uint8).max


def draw_counts(rng: np.random.Generator, n: int, size: int, replace: bool,
                strata: NDArray[np.int64] | None = None) -> NDArray[np.uint8]:
    """In-bag counts of one bootstrap sample of ``size`` draws from ``n`` cases.

    With ``replace=True`` (the bootstrap, Efron 1979) each of ``size`` draws picks a case uniformly; without
    replacement (subsampling) ``size`` distinct cases get count 1. With ``strata`` (a class index per case)
    the sample is stratified instead: see :func:`draw_balanced_counts`.

    Returns
    -------
    ndarray of uint8, shape (n,)
        How often each case was drawn.
    """
    if strata is not None:
        return draw_balanced_counts(rng, strata, size, replace)
    if replace:
        counts = np.bincount(rng.integers(0, n, size=size), minlength=n)
        if size > MAX_COUNT and counts.max() > MAX_COUNT:  # (no count exceeds the number of draws)
            raise ValueError(
                f"`sample_size` = {size} draws from {n} cases put more than {MAX_COUNT} copies of one case "
                f"in a sample; use a smaller `sample_size`"
            )
        return counts.astype(np.uint8)
    counts = np.zeros(n, dtype=np.uint8)
    counts[rng.choice(n, size=size, replace=False)] = 1
    return counts


def draw_balanced_counts(rng: np.random.Generator, strata: NDArray[np.int64], size: int,
                         replace: bool) -> NDArray[np.uint8]:
    """In-bag counts of a class-balanced sample: ``size // K`` draws from each of the ``K`` classes.

    The balanced random forest of Chen, Liaw & Breiman (2004), "Using random forest to learn imbalanced data"
    (Technical report 666, Department of Statistics, UC Berkeley): each tree's sample takes the same number
    of cases from every class, with replacement (or, with ``replace=False``, distinct cases). All draws of
    one sample come from one call on ``rng``.

    Parameters
    ----------
    rng : numpy.random.Generator
        The tree's generator.
    strata : ndarray of int64, shape (n,)
        Class index of every case, every class ``0..K-1`` present.
    size : int
        Total draws; each class gets ``size // K`` (at least 1, checked by the caller).
    replace : bool
        Draw with replacement within each class, or distinct cases.

    Returns
    -------
    ndarray of uint8, shape (n,)
    """
    n = strata.size
    class_size = np.bincount(strata)
    per_class = size // class_size.size
    by_class = np.argsort(strata, kind="stable")
    first = np.cumsum(class_size) - class_size
    if replace:
        start = np.repeat(first, per_class)
        offset = rng.integers(0, np.repeat(class_size, per_class))
        counts = np.bincount(by_class[start + offset], minlength=n)
        if counts.max() > MAX_COUNT:
            raise ValueError(
                f"`sample_size` = {size} balanced draws put more than {MAX_COUNT} copies of one case in a "
                f"sample; use a smaller `sample_size`"
            )
        return counts.astype(np.uint8)
    keys = rng.random(n)
    ranked = np.lexsort((keys, strata))
    position = np.arange(n) - np.repeat(first, class_size)
    counts = np.zeros(n, dtype=np.uint8)
    counts[ranked[position < per_class]] = 1
    return counts


def balanced_sample_size(size: int | float | None, strata: NDArray[np.int64], replace: bool) -> int:
    """Total draws of a class-balanced sample: ``K * (size // K)``; None gives ``K`` times the smallest class.

    A fraction ``size`` is a share of all ``n`` cases. Raises when a class would get no draw, or (without
    replacement) more draws than the smallest class has cases.
    """
    class_size = np.bincount(strata)
    K, smallest = class_size.size, int(class_size.min())
    if size is None:
        total = K * smallest
    elif isinstance(size, float):
        total = max(1, math.floor(size * strata.size))
    else:
        total = int(size)
    per_class = total // K
    if per_class < 1:
        raise ValueError(f"`sample_size` = {total} leaves no draw per class for {K} classes with "
                         f"`balance='classes'`; use at least {K}")
    if not replace and per_class > smallest:
        raise ValueError(f"`sample_size` = {total} asks {per_class} distinct cases of every class without "
                         f"replacement, but the smallest class has {smallest}")
    return K * per_class
