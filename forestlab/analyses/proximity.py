"""Which cases are alike or odd: forest proximities, outlyingness and a map of the cases.

The proximity of two cases is the share of trees in which they land in the same leaf (Breiman 2001, "Random
forests", and Breiman & Cutler's random forests manual); with ``oob=True`` only trees for which both cases are
out-of-bag count. Leaf membership is a sparse (cases x all leaves) indicator matrix ``A`` with one entry per
(case, tree), so a block of rows of the proximity matrix is ``A[rows] @ A.T``: the full matrix is never formed
in intermediate steps, and analyses that only need sums over it (outlyingness) never store it.
"""

from __future__ import annotations

import numbers
import warnings
from collections.abc import Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from .._warnings import OverlapWarning
from .cases import ROW_BUDGET, analysis_X, analysis_y, leaves, row_blocks
from .view import FittedForest

if TYPE_CHECKING:
    import scipy.sparse

# scipy is imported where it is used: it is most of the time ``import forestlab`` takes, which every worker
# process of ``workers=k`` pays at start.

__all__ = ["ProximityMap", "classical_scaling", "outlyingness", "proximity", "proximity_blocks",
           "proximity_map"]

# Above this many cases the map uses an iterative (Lanczos) eigensolver for the leading eigenvectors.
DENSE_EIGEN_LIMIT = 500


@dataclass(frozen=True, eq=False, repr=False)
class ProximityMap:
    """Classical (Torgerson) multidimensional scaling of the forest dissimilarities ``1 - proximity``.

    Attributes
    ----------
    coordinates : ndarray of float64, shape (n, dims)
        Position of every case; Euclidean distances between them approximate ``1 - proximity``.
    eigenvalues : ndarray of float64, shape (dims,)
        Leading eigenvalues of the double-centred squared dissimilarities, decreasing.
    explained : ndarray of float64, shape (dims,)
        ``eigenvalues`` as shares of the trace (the sum of all eigenvalues).
    """

    coordinates: NDArray[np.float64]
    eigenvalues: NDArray[np.float64]
    explained: NDArray[np.float64]

    def __repr__(self) -> str:
        shares = ", ".join(f"{s:.1%}" for s in self.explained)
        cases, dims = self.coordinates.shape
        return f"ProximityMap(cases={cases}, dims={dims}, explained=[{shares}])"


def _check_bool(value: Any, name: str) -> bool:
    if not isinstance(value, (bool, np.bool_)):
        raise TypeError(f"`{name}` must be True or False; got {type(value).__name__}")
    return bool(value)


def _check_block(block: Any, n: int) -> int:
    if block is None:
        return max(1, min(n, ROW_BUDGET // n))
    if isinstance(block, (bool, np.bool_)) or not isinstance(block, numbers.Integral) or block < 1:
        raise ValueError(f"`block` must be a positive int number of rows; got {block!r}")
    return int(block)


def _leaf_indicator(forest: FittedForest, X: NDArray, weights: NDArray | None) -> scipy.sparse.csr_matrix:
    """Sparse (n, total leaves) matrix with ``weights[b, i]`` (or 1) at (i, leaf of case i in tree b)."""
    where = leaves(forest, X)
    offsets = np.cumsum([0] + [tree.nodes for tree in forest.trees[:-1]])
    cols = (where + offsets[:, None]).T.ravel()
    data = np.ones(cols.size) if weights is None else weights.T.astype(np.float64).ravel()
    n, trees = X.shape[0], len(forest.trees)
    indptr = np.arange(0, n * trees + 1, trees)
    total = int(offsets[-1] + forest.trees[-1].nodes)
    import scipy.sparse

    return scipy.sparse.csr_matrix((data, cols, indptr), shape=(n, total))


def proximity_blocks(forest: FittedForest, X: NDArray, oob: bool, block: int) -> Iterator[tuple[slice, NDArray]]:
    """Consecutive row blocks ``(rows, P[rows])`` of the proximity matrix, each of shape (rows, n).

    Pairs never out-of-bag together (``oob=True``) get NaN; the diagonal is 1.
    """
    n = X.shape[0]
    inside = (forest.inbag == 0) if oob else None
    A = _leaf_indicator(forest, X, inside)
    AT = A.T.tocsr()
    both_out = inside.astype(np.float64) if oob else None
    for start in range(0, n, block):
        rows = slice(start, min(n, start + block))
        shared = (A[rows] @ AT).toarray()
        if oob:
            both = both_out[:, rows].T @ both_out
            with np.errstate(divide="ignore", invalid="ignore"):
                P = np.where(both > 0, shared / np.where(both > 0, both, 1.0), np.nan)
        else:
            P = shared / len(forest.trees)
        P[np.arange(P.shape[0]), np.arange(rows.start, rows.stop)] = 1.0
        yield rows, P


def proximity(forest: FittedForest, oob: bool = True, *, X: Any = None, block: Any = None) -> NDArray[np.float64]:
    """Share of trees in which two cases land in the same leaf: an (n, n) float64 array.

    Called as ``forest.proximity(...)``. With ``oob=True`` (training cases only) a tree counts for a pair
    only when both cases are out-of-bag for it; pairs never out-of-bag together are NaN (with an
    :class:`OverlapWarning`). The diagonal is 1. Rows are computed ``block`` at a time from a sparse
    leaf-membership matrix, so the working memory beyond the (n, n) result stays near ``trees x n``;
    n = 10 000 needs the 800 MB result and little more. ``X`` gives other cases (then ``oob=False``).
    """
    oob = _check_bool(oob, "oob")
    data, training = analysis_X(forest, X)
    if oob and not training:
        raise ValueError("`oob=True` needs the training cases; pass `oob=False` with new `X`")
    n = data.shape[0]
    out = np.empty((n, n))
    for rows, P in proximity_blocks(forest, data, oob, _check_block(block, n)):
        out[rows] = P
    missing = int(np.isnan(out).sum()) // 2
    if missing:
        warnings.warn(f"{missing} pair(s) of cases are never out-of-bag in the same tree; their proximity is NaN "
                      "(grow more trees)", OverlapWarning, stacklevel=3)
    return out


def outlyingness(forest: FittedForest, oob: bool = True, *, X: Any = None, y: Any = None,
                 block: Any = None) -> NDArray[np.float64]:
    """Outlier score of every case within its class (Breiman & Cutler's measure), shape (n,).

    Called as ``forest.outlyingness(...)``. Raw score ``n / sum_k prox(i, k)^2`` over the other cases ``k``
    of case ``i``'s class (all cases for regression), then standardised within each class: minus the class
    median, divided by the class median absolute deviation. Large values (common practice: above about 10)
    mark cases unlike the rest of their class. Streams proximity blocks; the (n, n) matrix is never stored.
    With new ``X``, ``y`` gives their classes.
    """
    oob = _check_bool(oob, "oob")
    data, training = analysis_X(forest, X)
    if oob and not training:
        raise ValueError("`oob=True` needs the training cases; pass `oob=False` with new `X`")
    n = data.shape[0]
    if forest.task == "regression":
        if y is not None:
            raise ValueError("`y` is only used by classification forests (cases are grouped by class)")
        codes = np.zeros(n, dtype=np.int64)
    elif training:
        if y is not None:
            raise ValueError("pass `y` only together with new `X`; the training labels are used otherwise")
        codes = forest.y
    else:
        if y is None:
            raise ValueError("`y` (the class of every case) is needed with new `X`")
        codes = analysis_y(forest, y, n)
    return _standardise(_raw_outlyingness(forest, data, codes, oob, _check_block(block, n)), codes)


def _raw_outlyingness(forest: FittedForest, X: NDArray, codes: NDArray, oob: bool, block: int) -> NDArray:
    """``n / sum_k prox(i, k)^2`` over the other cases k of case i's class (inf when that sum is 0)."""
    n = X.shape[0]
    member = np.zeros((n, int(codes.max()) + 1))
    member[np.arange(n), codes] = 1.0
    within = np.empty(n)
    for rows, P in proximity_blocks(forest, X, oob, block):
        P = np.nan_to_num(P, nan=0.0)
        P[np.arange(P.shape[0]), np.arange(rows.start, rows.stop)] = 0.0
        within[rows] = ((P * P) @ member)[np.arange(P.shape[0]), codes[rows]]
    with np.errstate(divide="ignore"):
        return n / within


def _standardise(raw: NDArray, codes: NDArray) -> NDArray:
    """(raw - class median) / class median absolute deviation; a zero deviation leaves the scale at 1."""
    out = np.empty_like(raw)
    for k in np.unique(codes):
        mine = codes == k
        centre = np.median(raw[mine])
        with np.errstate(invalid="ignore"):
            mad = np.median(np.abs(raw[mine] - centre))
            scale = mad if np.isfinite(mad) and mad > 0 else 1.0
            out[mine] = (raw[mine] - centre) / scale
    return out


def proximity_map(forest: FittedForest, dims: int = 2, *, oob: bool = True, X: Any = None) -> ProximityMap:
    """Map of the cases: classical multidimensional scaling of ``1 - proximity`` (:class:`ProximityMap`).

    Called as ``forest.proximity_map(...)``; ``oob`` and ``X`` as for :func:`proximity`.
    """
    oob = _check_bool(oob, "oob")
    data, _ = analysis_X(forest, X)
    _check_dims(dims, data.shape[0])
    D = proximity(forest, oob, X=X)
    np.nan_to_num(D, copy=False, nan=0.0)
    np.subtract(1.0, D, out=D)  # dissimilarity 1 - proximity, in place
    return classical_scaling(D, dims)


def _check_dims(dims: Any, n: int) -> int:
    if isinstance(dims, (bool, np.bool_)) or not isinstance(dims, numbers.Integral):
        raise TypeError(f"`dims` must be an int; got {type(dims).__name__}")
    if not 1 <= dims < n:
        raise ValueError(f"`dims` must be between 1 and {n - 1} (cases - 1); got {dims}")
    return int(dims)


def classical_scaling(distances: Any, dims: int = 2) -> ProximityMap:
    """Classical (Torgerson) multidimensional scaling of a symmetric distance matrix.

    ``B = -1/2 J D^2 J`` with the centring matrix ``J = I - 11'/n``; the coordinates are the leading
    eigenvectors of ``B`` scaled by the square roots of their (non-negative part of the) eigenvalues. Each
    column's sign is fixed so that its largest-magnitude entry is positive.

    Parameters
    ----------
    distances : array_like, shape (n, n)
        Symmetric, finite, non-negative, zero on the diagonal.
    dims : int, default 2
        Number of coordinates, between 1 and n - 1.

    Returns
    -------
    ProximityMap
    """
    D = np.asarray(distances, dtype=np.float64)
    if D.ndim != 2 or D.shape[0] != D.shape[1] or D.shape[0] < 2:
        raise ValueError(f"`distances` must be a square matrix of at least 2 x 2; got shape {D.shape}")
    if not _symmetric_distances(D):
        raise ValueError("`distances` must be finite, non-negative and symmetric")
    n = D.shape[0]
    dims = _check_dims(dims, n)
    B = D * D  # becomes -1/2 J D^2 J in place: the (n, n) work arrays stay at one
    row = B.mean(axis=1)
    B -= row[:, None]
    B -= row[None, :]
    B += row.mean()
    B *= -0.5
    values, vectors = _leading_eigen(B, dims)
    coords = vectors * np.sqrt(np.maximum(values, 0.0))
    flip = np.sign(coords[np.argmax(np.abs(coords), axis=0), np.arange(dims)])
    coords = coords * np.where(flip == 0, 1.0, flip)
    trace = float(np.trace(B))
    explained = values / trace if trace > 0 else np.full(dims, np.nan)
    return ProximityMap(coordinates=coords, eigenvalues=values, explained=explained)


def _symmetric_distances(D: NDArray) -> bool:
    """Finite, non-negative and symmetric, checked a block of rows at a time (no (n, n) temporaries)."""
    for rows in row_blocks(D.shape[0], D.shape[0]):
        part = D[rows]
        if not (np.all(np.isfinite(part)) and part.min() >= 0 and np.allclose(part, D[:, rows].T, atol=1e-12)):
            return False
    return True


def _leading_eigen(B: NDArray, dims: int) -> tuple[NDArray, NDArray]:
    """The ``dims`` largest eigenvalues of symmetric ``B`` (decreasing) and their unit eigenvectors."""
    import scipy.linalg
    import scipy.sparse.linalg

    n = B.shape[0]
    if n <= DENSE_EIGEN_LIMIT:
        values, vectors = scipy.linalg.eigh(B, subset_by_index=[n - dims, n - 1])
    else:
        start = np.random.default_rng(0).standard_normal(n)  # fixed start: the map is reproducible
        values, vectors = scipy.sparse.linalg.eigsh(B, k=dims, which="LA", v0=start)
    order = np.argsort(values)[::-1]
    return values[order], vectors[:, order]
