"""Candidate-feature samplers: which features each open node may split on.

A sampler never creates or stores random state: the engine hands it the tree's own
:class:`numpy.random.Generator`, so every draw comes from that tree's ``SeedSequence`` child.
"""

from __future__ import annotations

import abc
import math
import numbers
import warnings
from typing import ClassVar

import numpy as np
from numpy.typing import NDArray

from .._warnings import CandidatesCappedWarning
from .component import Component

__all__ = ["CandidateSampler", "AllFeatures", "RandomSubset", "TreeSubspace", "TreeGenerators", "checked_mask",
           "draw_masks"]

_NAMED_SIZES = ("log2", "sqrt")


class CandidateSampler(Component, abc.ABC):
    """Abstract candidate-feature sampler; subclass it to choose split candidates your own way.

    Implement ``draw(rng, nodes, features)`` returning a boolean mask of shape ``(nodes, features)``: row ``k``
    marks the features open node ``k`` of the current level may split on. Set the class attribute
    ``per_tree = True`` to have ``draw`` called once per tree (with ``nodes == 1``) and its row used for every
    node of that tree, as in the random subspace method.

    If none of a node's candidates can split it (all are constant in the node), a per-node sampler's node
    falls back to the remaining features, so a node becomes a leaf only when no feature can split it. A
    per-tree sampler's mask is final.

    Examples
    --------
    A sampler that always offers feature 0 plus one other feature at random:

    >>> import numpy as np, forestlab as fl
    >>> class FirstPlusOne(fl.CandidateSampler):
    ...     def draw(self, rng, nodes, features):
    ...         mask = np.zeros((nodes, features), dtype=bool)
    ...         mask[:, 0] = True
    ...         mask[np.arange(nodes), rng.integers(0, features, size=nodes)] = True
    ...         return mask
    >>> X = np.random.default_rng(0).normal(size=(100, 4)); y = X[:, 1] > 0
    >>> fl.Forest(trees=5, sampler=FirstPlusOne(), rng=0).fit(X, y).predict(X[:3]).shape
    (3,)
    """

    per_tree: ClassVar[bool] = False

    @abc.abstractmethod
    def draw(self, rng: np.random.Generator, nodes: int, features: int) -> NDArray[np.bool_]:
        """Candidate mask for the open nodes of one level.

        Parameters
        ----------
        rng : numpy.random.Generator
            The tree's generator; draw only from it.
        nodes : int
            Number of open nodes at this level (1 for a per-tree sampler).
        features : int
            Number of features ``p``.

        Returns
        -------
        ndarray of bool, shape (nodes, features)
        """

    def resolve(self, features: int, task: str) -> CandidateSampler:
        """This sampler with any task-dependent size fixed for ``features`` features (used at fit)."""
        return self


class AllFeatures(CandidateSampler):
    """Every feature is a candidate at every node: plain bagging (Breiman 1996, "Bagging predictors")."""

    def draw(self, rng: np.random.Generator, nodes: int, features: int) -> NDArray[np.bool_]:
        return np.ones((nodes, features), dtype=bool)


def _check_size(m: object, argument: str) -> int | float | str | None:
    """Validate a candidate count spec: positive int, fraction in (0, 1], 'sqrt', 'log2' or None."""
    if m is None:
        return None
    if isinstance(m, str):
        if m not in _NAMED_SIZES:
            raise ValueError(f"`{argument}` must be one of {sorted(_NAMED_SIZES)}, an int or a fraction; got {m!r}")
        return m
    if isinstance(m, (bool, np.bool_)):
        raise TypeError(f"`{argument}` must be an int, a float fraction, 'sqrt' or 'log2'; got a bool")
    if isinstance(m, numbers.Integral):
        if m < 1:
            raise ValueError(f"`{argument}` must be at least 1 when an int; got {m}")
        return int(m)
    if isinstance(m, numbers.Real):
        if not 0.0 < float(m) <= 1.0:
            raise ValueError(f"`{argument}` must lie in (0, 1] when a fraction; got {m}")
        return float(m)
    raise TypeError(f"`{argument}` must be an int, a float fraction, 'sqrt' or 'log2'; got {type(m).__name__}")


def candidate_count(m: int | float | str | None, features: int, task: str) -> int:
    """Number of candidates a size spec gives for ``features`` features.

    ``None`` is the common-practice default: ``floor(sqrt(p))`` for classification and ``max(1, floor(p/3))``
    for regression. ``"sqrt"`` is ``floor(sqrt(p))``; ``"log2"`` is ``int(log2(p) + 1)`` (Breiman 2001,
    "Random forests", section 5); a fraction ``f`` gives ``max(1, floor(f * p))``; an int is capped at ``p``.
    """
    if m is None:
        m = "sqrt" if task == "classification" else max(1, features // 3)
    if m == "sqrt":
        count = math.isqrt(features)
    elif m == "log2":
        count = int(math.log2(features) + 1)
    elif isinstance(m, float):
        count = math.floor(m * features)
    else:
        count = int(m)
    return max(1, min(count, features))


def _random_mask(rng: np.random.Generator, rows: int, features: int, m: int) -> NDArray[np.bool_]:
    """Each row marks ``m`` of ``features`` columns, uniformly without replacement."""
    if m >= features:
        return np.ones((rows, features), dtype=bool)
    keys = rng.random((rows, features))
    # the m smallest of independent uniform keys (ties have probability zero)
    return keys <= np.partition(keys, m - 1, axis=1)[:, m - 1:m]


class RandomSubset(CandidateSampler):
    """A fresh random subset of ``m`` features at every node: the random forest (Breiman 2001).

    Parameters
    ----------
    m : int, float, {"sqrt", "log2"} or None
        Candidates per split: an int (one above ``p`` is capped at ``p``, with a
        :class:`~forestlab.CandidatesCappedWarning`), a fraction of the features, ``"sqrt"``
        (``floor(sqrt(p))``), ``"log2"`` (``int(log2(p) + 1)``, Breiman 2001, section 5), or None for the
        common-practice default (``floor(sqrt(p))`` for classification, ``max(1, floor(p/3))`` for regression).
    """

    def __init__(self, m: int | float | str | None = None) -> None:
        self.m = _check_size(m, "m")

    def resolve(self, features: int, task: str) -> RandomSubset:
        _warn_if_capped(self, features, "at every node")
        return RandomSubset(candidate_count(self.m, features, task))

    def draw(self, rng: np.random.Generator, nodes: int, features: int) -> NDArray[np.bool_]:
        return _random_mask(rng, nodes, features, candidate_count(self.m, features, "classification"))

    def __repr__(self) -> str:
        return f"RandomSubset({self.m!r})"


class TreeSubspace(CandidateSampler):
    """One random subset of ``m`` features per tree: the random subspace method (Ho 1998).

    Ho, T. K. (1998), "The random subspace method for constructing decision forests", IEEE Transactions on
    Pattern Analysis and Machine Intelligence 20(8), 832-844. Each tree sees only its own subset.

    Parameters
    ----------
    m : int, float, {"sqrt", "log2"} or None
        Size of each tree's subset, as for :class:`RandomSubset`; None gives half the features (Ho 1998
        found subspaces of about half the features to work well; from memory).
    """

    per_tree: ClassVar[bool] = True

    def __init__(self, m: int | float | str | None = None) -> None:
        self.m = _check_size(m, "m")

    def resolve(self, features: int, task: str) -> TreeSubspace:
        _warn_if_capped(self, features, "for every tree")
        size = max(1, features // 2) if self.m is None else candidate_count(self.m, features, task)
        return TreeSubspace(size)

    def draw(self, rng: np.random.Generator, nodes: int, features: int) -> NDArray[np.bool_]:
        m = max(1, features // 2) if self.m is None else candidate_count(self.m, features, "classification")
        return _random_mask(rng, nodes, features, m)

    def __repr__(self) -> str:
        return f"TreeSubspace({self.m!r})"


def _warn_if_capped(sampler: RandomSubset | TreeSubspace, features: int, where: str) -> None:
    """Warn when an int ``m`` exceeds the number of features (it is capped at ``p``)."""
    if isinstance(sampler.m, int) and sampler.m > features:
        warnings.warn(f"{sampler!r} asks for m = {sampler.m} candidate features {where}, but the data have p = "
                      f"{features}; all {features} are candidates", CandidatesCappedWarning, stacklevel=6)


def checked_mask(sampler: CandidateSampler, rng: np.random.Generator, nodes: int,
                 features: int) -> NDArray[np.bool_]:
    """``sampler.draw`` with its output checked, naming the sampler class if it is wrong."""
    mask = sampler.draw(rng, nodes, features)
    if not isinstance(mask, np.ndarray) or mask.dtype != np.bool_ or mask.shape != (nodes, features):
        got = f"{mask.dtype} array of shape {mask.shape}" if isinstance(mask, np.ndarray) else type(mask).__name__
        raise ValueError(
            f"{type(sampler).__name__}.draw(rng, {nodes}, {features}) must return a bool array of shape "
            f"({nodes}, {features}); got {got}"
        )
    return mask


def draw_masks(sampler: CandidateSampler, gens: list[np.random.Generator], nodes: NDArray[np.int64],
               features: int) -> NDArray[np.bool_]:
    """Candidate masks of ``nodes[t]`` nodes of every tree ``t``, stacked in tree order; tree ``t`` draws only
    from ``gens[t]``.

    The same masks as one ``draw`` call per tree with nodes; for :class:`RandomSubset` every tree draws its
    uniform keys and the m smallest of every row are then found for all trees at once.
    """
    if type(sampler) is RandomSubset:
        m = candidate_count(sampler.m, features, "classification")
        if m >= features:
            return np.ones((int(np.sum(nodes)), features), dtype=bool)
        if isinstance(gens, TreeGenerators) and len(gens) > 1:  # (one tree: its own call per level, as below)
            keys = gens.uniform_rows(nodes, features)
        else:
            live = np.flatnonzero(nodes)
            ends = np.cumsum(nodes[live])
            keys = np.empty((int(ends[-1]) if ends.size else 0, features))
            for t, lo, hi in zip(live.tolist(), (ends - nodes[live]).tolist(), ends.tolist()):
                gens[t].random(out=keys[lo:hi])  # the same numbers as ``random((hi - lo, features))``
        return keys <= np.partition(keys, m - 1, axis=1)[:, m - 1:m]
    return np.concatenate([checked_mask(sampler, gens[t], int(k), features) for t, k in enumerate(nodes) if k])


class TreeGenerators(list):
    """The generators of a batch's trees in slot order (a list), which also draw :class:`RandomSubset`'s
    uniform keys ahead of the levels that use them.

    A generator's doubles come one after another however many each call takes, so a tree's keys drawn a
    chunk at a time are the numbers one ``random`` call per level would give; nothing else draws from a
    tree's generator once its levels begin (the bootstrap sample comes first), and the keys drawn beyond the
    last level are never used. One call per tree every few levels instead of one per tree and level (about
    0.6 us each): at n = 1 000 a batch of 64 trees makes about 700 calls less. The keys held are those of
    the current level and the ones drawn ahead of it, at most twice the largest level's (spent rows are
    dropped whenever the array grows), so a batch holds about what one level's keys take.
    """

    #: Rows (nodes) of keys a tree draws first; the array grows to twice the largest level's rows
    FIRST_ROWS = 32

    def __init__(self, gens) -> None:
        super().__init__(gens)
        self._keys: NDArray[np.float64] | None = None  # (trees, rows, features): rows drawn[t] onwards unset
        self._drawn = np.zeros(len(self), dtype=np.int64)
        self._used = np.zeros(len(self), dtype=np.int64)

    def uniform_rows(self, nodes: NDArray[np.int64], features: int) -> NDArray[np.float64]:
        """The next ``nodes[t]`` rows of ``features`` uniform keys of every tree ``t``, stacked in tree order:
        what ``self[t].random((nodes[t], features))`` would give, tree after tree."""
        if self._keys is None or int((self._used + nodes).max()) > self._keys.shape[1]:
            self._regrow(nodes, features)
        used, need = self._used, self._used + nodes
        held = self._keys.shape[1]
        for t in (need > self._drawn).nonzero()[0].tolist():
            self[t].random(out=self._keys[t, self._drawn[t]:])
            self._drawn[t] = held
        self._used = need
        first = nodes.cumsum() - nodes
        rows = np.arange(int(first[-1] + nodes[-1])) + np.repeat(np.arange(len(self)) * held + used - first, nodes)
        return self._keys.reshape(-1, features).take(rows, axis=0, mode="clip")

    def _regrow(self, nodes: NDArray[np.int64], features: int) -> None:
        """A new key array of twice the largest level's rows, holding each tree's keys drawn and not yet
        used at its start (the spent rows dropped)."""
        ahead = self._drawn - self._used
        rows = max(self.FIRST_ROWS, 2 * int(nodes.max()), int((ahead + nodes).max()))
        keys = np.empty((len(self), rows, features))
        if self._keys is not None:
            for t in ahead.nonzero()[0].tolist():  # (a loop over trees, a few times a fit)
                keys[t, :ahead[t]] = self._keys[t, self._used[t]:self._drawn[t]]
        self._keys, self._drawn, self._used = keys, ahead, np.zeros_like(ahead)
