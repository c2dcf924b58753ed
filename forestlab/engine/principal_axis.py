"""The first principal axis of many small weighted point clouds at once, by power iteration.

The many-class category order (:mod:`.categories`) projects every category's class shares on the first
principal component of the node's weighted class-share matrix (Coppersmith, Hong & Hosking 1999). Solving a
``K x K`` eigen-problem per candidate (LAPACK, one call per matrix) cost about 14 microseconds a candidate at
``K = 10`` (more at larger ``K``), several times the rest of a categorical search. Only the leading
direction is needed, and only through the order of the projections, so it is found by power iteration on
the smaller of the two Gram matrices of ``A = sqrt(w) * centred`` (rows: categories, columns: classes):
``A A^T`` (categories x categories) or ``A^T A`` (classes x classes, the weighted covariance up to a factor),
all candidates together, the same number of iterations for each (so its result does not depend on the
other candidates of its batch).

The direction of an eigenvector is arbitrary; it is fixed here so that the first of the largest components
(within a relative 1e-6) of the class-space direction is positive, which decides which side of a split is
"left". With two classes in a node that is the lower class, so its categories are ordered by that class's
share, as :mod:`.categories` orders them directly for such nodes.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["projections"]

#: power iterations of every candidate: the same number for all, so a candidate's result does not depend on
#: the other candidates of its batch. Each iteration shrinks the next direction by the ratio of the second
#: eigenvalue to the first: leading eigenvalues apart by a factor 2 leave it at 2**-12 (2.4e-4) of the
#: first, by a factor 4 at 6e-8; only the order of a node's few categories is read from the result.
ITERATIONS = 12
#: components within this relative distance of the largest count as largest for the direction (the first
#: of them decides): with two classes in a node the two components are equal up to rounding
LEADING = 1e-6


def projections(weight: NDArray[np.float64], centred: NDArray[np.float64]) -> NDArray[np.float64]:
    """Scores of the categories (C, k) along each candidate's first weighted principal axis, up to a
    positive factor per candidate (only their order is used). ``weight`` (C, k) is each category's weight,
    ``centred`` (C, k, K) its class shares less the candidate's weighted mean shares. A candidate whose points
    all coincide gets zeros. The power iterations run with the candidates last (``einsum`` over (r, r, C)
    arrays): a stacked ``matmul`` of 8 x 8 matrices took three times as long."""
    C, k, K = centred.shape
    A = np.sqrt(weight)[..., None] * centred
    if k <= K:  # iterate in category space: u ~ A v
        u = _leading(np.ascontiguousarray(np.matmul(A, A.transpose(0, 2, 1)).transpose(1, 2, 0)))
        v = np.matmul(A.transpose(0, 2, 1), u.T[..., None])[..., 0]
    else:
        v = _leading(np.ascontiguousarray(np.matmul(A.transpose(0, 2, 1), A).transpose(1, 2, 0))).T
    size = np.abs(v)
    big = np.argmax(size >= (1 - LEADING) * size.max(axis=1, keepdims=True), axis=1)
    v *= np.where(np.take_along_axis(v, big[:, None], axis=1) < 0, -1.0, 1.0)
    return np.matmul(centred, v[..., None])[..., 0]


def _leading(gram: NDArray[np.float64]) -> NDArray[np.float64]:
    """Approximate unit leading eigenvector (r, C) of every symmetric positive semi-definite matrix of
    ``gram`` (r, r, C) (zeros for a zero matrix): :data:`ITERATIONS` power iterations from its heaviest
    column."""
    r, _, C = gram.shape
    diagonal = np.einsum("iic->ic", gram)
    u = _unit(np.take_along_axis(gram, np.argmax(diagonal, axis=0)[None, None, :], axis=1)[:, 0, :])
    for _ in range(ITERATIONS):
        u = _unit(np.einsum("ijc,jc->ic", gram, u))
    return u


def _unit(u: NDArray[np.float64]) -> NDArray[np.float64]:
    """``u`` (r, C) scaled to unit length per candidate (zero vectors stay zero)."""
    norm = np.sqrt(np.einsum("ic,ic->c", u, u))
    return u / np.where(norm > 0, norm, 1.0)[None, :]
