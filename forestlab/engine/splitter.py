"""Split criteria: impurity functions of additive sufficient statistics.

A splitter turns each training case into a short vector of *statistics* whose weighted sums describe a node
completely for the criterion at hand, and maps an array of summed statistics to impurities. The level-wise
engine sums the statistics over every candidate left child of every open node at once, so ``impurity`` is
always called on whole arrays, never per node.

Channel 0 of every summed statistic array ``S`` is the summed case weight ``W`` (bootstrap count times case
weight), which the engine tracks itself; channels ``1:`` are the weighted sums of the columns returned by
``statistics``. The score of a split of node ``t`` into ``l`` and ``r`` is the weighted impurity decrease

    W_t * i(t) - W_l * i(l) - W_r * i(r),

and the best split of a node is the one with the largest score (Breiman, Friedman, Olshen & Stone 1984,
*Classification and Regression Trees*, section 4.1). ``impurity`` is only ever called on nodes of positive
weight.
"""

from __future__ import annotations

import abc
from typing import ClassVar

import numpy as np
from numpy.typing import NDArray

from .component import Component

__all__ = ["CartSplitter", "GiniSplitter", "EntropySplitter", "SquaredErrorSplitter", "call_splitter"]

TASKS = ("classification", "regression")


class CartSplitter(Component, abc.ABC):
    """Abstract split criterion on additive statistics; subclass it for an impurity of your own.

    A subclass sets the class attribute ``task`` (``"classification"`` or ``"regression"``) and implements
    two methods, both vectorised:

    ``statistics(y, classes)``
        Per-case statistics, shape ``(n, s)``. ``y`` holds class indices ``0..classes-1`` (int64) for
        classification and float64 values for regression (then ``classes == 0``). Called once per fit.
    ``impurity(S)``
        ``S`` has shape ``(..., 1 + s)``: channel 0 is the summed case weight, channels ``1:`` the weighted
        sums of the statistics. Returns the impurity per unit weight, shape ``(...)``, finite and ``>= 0``.

    The built-in splitters are such subclasses themselves. forestlab checks a splitter's output at the start
    of every fit and names the class in the error if a shape, a NaN or a negative impurity is wrong.

    Examples
    --------
    A Poisson-deviance splitter for count targets, in ten lines:

    >>> import numpy as np, forestlab as fl
    >>> class PoissonSplitter(fl.CartSplitter):
    ...     task = "regression"
    ...     def statistics(self, y, classes):
    ...         ylogy = y * np.log(np.where(y > 0, y, 1.0))
    ...         return np.column_stack([y, ylogy])
    ...     def impurity(self, S):
    ...         w, sy, sylogy = S[..., 0], S[..., 1], S[..., 2]
    ...         mu = sy / w
    ...         return np.maximum(sylogy / w - mu * np.log(np.where(mu > 0, mu, 1.0)), 0.0)
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(size=(200, 3))
    >>> y = rng.poisson(np.exp(1 + 2 * X[:, 0])).astype(float)
    >>> forest = fl.Forest(trees=20, splitter=PoissonSplitter(), rng=1).fit(X, y)
    >>> forest.predict(X[:2]).shape
    (2,)
    """

    task: ClassVar[str]

    @abc.abstractmethod
    def statistics(self, y: NDArray, classes: int) -> NDArray[np.float64]:
        """Per-case statistics whose weighted sums the impurity is computed from.

        Parameters
        ----------
        y : ndarray, shape (n,)
            Class indices (int64, ``0..classes-1``) for classification; float64 targets for regression.
        classes : int
            Number of classes (0 for regression).

        Returns
        -------
        ndarray, shape (n, s)
        """

    @abc.abstractmethod
    def impurity(self, S: NDArray[np.float64]) -> NDArray[np.float64]:
        """Impurity per unit weight of nodes with summed statistics ``S``.

        Parameters
        ----------
        S : ndarray, shape (..., 1 + s)
            Channel 0: summed case weight (always > 0); channels 1..s: weighted sums of ``statistics``.

        Returns
        -------
        ndarray, shape (...)
            Finite, non-negative impurities.
        """


def _one_hot(y: NDArray, classes: int) -> NDArray[np.float64]:
    """Class indicator statistics: row i has a 1 in column y[i]."""
    return np.eye(classes)[y]


def _class_shares(S: NDArray[np.float64]) -> NDArray[np.float64]:
    """Class proportions p_k = S_k / W of summed one-hot statistics."""
    return S[..., 1:] / S[..., :1]


class GiniSplitter(CartSplitter):
    """Gini impurity ``1 - sum_k p_k**2`` (Breiman et al. 1984, section 4.3)."""

    task: ClassVar[str] = "classification"

    def statistics(self, y: NDArray, classes: int) -> NDArray[np.float64]:
        return _one_hot(y, classes)

    def impurity(self, S: NDArray[np.float64]) -> NDArray[np.float64]:
        p = _class_shares(S)
        return np.maximum(1.0 - np.einsum("...k,...k->...", p, p), 0.0)


class EntropySplitter(CartSplitter):
    """Entropy impurity ``-sum_k p_k log p_k`` in nats (Breiman et al. 1984, section 4.3; Shannon 1948)."""

    task: ClassVar[str] = "classification"

    def statistics(self, y: NDArray, classes: int) -> NDArray[np.float64]:
        return _one_hot(y, classes)

    def impurity(self, S: NDArray[np.float64]) -> NDArray[np.float64]:
        p = _class_shares(S)
        logp = np.log(np.where(p > 0.0, p, 1.0))
        return np.maximum(-np.einsum("...k,...k->...", p, logp), 0.0)


class SquaredErrorSplitter(CartSplitter):
    """Weighted variance of the target, ``E[y**2] - E[y]**2`` (Breiman et al. 1984, section 8.3).

    The statistics are ``[y - c, (y - c)**2]`` with ``c`` the mean of the training targets; centring does not
    change the variance and keeps the difference of the two terms accurate.
    """

    task: ClassVar[str] = "regression"

    def statistics(self, y: NDArray, classes: int) -> NDArray[np.float64]:
        d = y - y.mean()
        return np.column_stack([d, d * d])

    def impurity(self, S: NDArray[np.float64]) -> NDArray[np.float64]:
        mean = S[..., 1] / S[..., 0]
        return np.maximum(S[..., 2] / S[..., 0] - mean * mean, 0.0)


def call_splitter(splitter: CartSplitter, method: str, *args: object) -> object:
    """``splitter.<method>(*args)``; an exception it raises comes back as a RuntimeError that names the class
    and what it was given (shapes and dtypes), with the original chained as its cause."""
    try:
        return getattr(splitter, method)(*args)
    except Exception as exc:
        given = ", ".join(f"{a.dtype} array of shape {a.shape}" if isinstance(a, np.ndarray) else repr(a)
                          for a in args)
        raise RuntimeError(f"{type(splitter).__name__}.{method}({given}) raised {type(exc).__name__}: {exc}") from exc
