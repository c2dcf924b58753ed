"""Benchmark rows for many classes (issue 17): synthetic K-class problems against the yardstick, and an
all-categorical many-class problem fitted as categories and as the same codes taken as numbers.

Synthetic data (invented, seeded NumPy generators of our own):

* ``centroids(n, p, K, rng)``: ``K`` class centroids ``mu_k ~ N(0, I_p)``; each case draws its class
  uniformly from ``0..K-1`` and its predictors ``x ~ N(mu_y, I_p)`` (Gaussian classes around the centroids;
  at p = 16, K = 26 the nearest-centroid (Bayes) rule errs on about 9% of the cases). Values are continuous
  (no ties).
* ``category_table(n, p, K, levels, rng)``: ``p`` categorical predictors with ``levels`` categories each,
  drawn uniformly; each feature ``j`` has an effect table ``T_j ~ N(0, 1)`` of shape ``(levels, K)``, and
  the class is the argmax over ``k`` of ``sum_j T_j[x_j, k] + g_k`` (Gumbel noise as above). The codes
  ``0..levels-1`` are fitted once as categories (``categorical=`` every column) and once as numbers.

Run only these rows (fresh processes, alternating, medians) with::

    python3 benchmarks/many_class_rows.py [--quick] [--repeats 3]
"""

from __future__ import annotations

import numpy as np


def centroids(n: int, p: int, K: int, rng: np.random.Generator):
    """``n`` cases of ``p`` continuous predictors and ``K`` classes (see the module docstring)."""
    mu = rng.standard_normal((K, p))
    y = rng.integers(0, K, n)
    X = mu[y] + rng.standard_normal((n, p))
    return X, y.astype(np.float64)


def category_table(n: int, p: int, K: int, levels: int, rng: np.random.Generator):
    """``n`` cases of ``p`` categorical predictors (codes ``0..levels-1`` as floats) and ``K`` classes."""
    X = rng.integers(0, levels, size=(n, p))
    table = rng.standard_normal((p, levels, K))
    score = table[np.arange(p), X].sum(axis=1) + rng.gumbel(size=(n, K))
    return X.astype(np.float64), np.argmax(score, axis=1).astype(np.float64)
