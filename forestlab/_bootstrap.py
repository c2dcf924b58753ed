"""Bootstrap samples as per-case in-bag counts."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["draw_counts", "MAX_COUNT"]

MAX_COUNT = np.iinfo(np.uint8).max


def draw_counts(rng: np.random.Generator, n: int, size: int, replace: bool) -> NDArray[np.uint8]:
    """In-bag counts of one bootstrap sample of ``size`` draws from ``n`` cases.

    With ``replace=True`` (the bootstrap, Efron 1979) each of ``size`` draws picks a case uniformly; without
    replacement (subsampling) ``size`` distinct cases get count 1.

    Returns
    -------
    ndarray of uint8, shape (n,)
        How often each case was drawn.
    """
    if replace:
        counts = np.bincount(rng.integers(0, n, size=size), minlength=n)
        if counts.max() > MAX_COUNT:
            raise ValueError(
                f"`sample_size` = {size} draws from {n} cases put more than {MAX_COUNT} copies of one case "
                f"in a sample; use a smaller `sample_size`"
            )
        return counts.astype(np.uint8)
    counts = np.zeros(n, dtype=np.uint8)
    counts[rng.choice(n, size=size, replace=False)] = 1
    return counts
