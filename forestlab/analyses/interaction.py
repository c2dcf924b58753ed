"""Are two predictors acting together? Friedman & Popescu's H-statistic from partial dependence.

Friedman & Popescu (2008), "Predictive learning via rule ensembles", Annals of Applied Statistics 2, section
8.1. With every partial dependence function centred to mean 0 over the sample of cases ``x_1 .. x_N``:

- pair ``(j, k)``, their equation 44: ``H^2_jk = sum_i [F_jk(x_ij, x_ik) - F_j(x_ij) - F_k(x_ik)]^2 /
  sum_i F_jk(x_ij, x_ik)^2``, the share of the pair's joint dependence that the two single dependences do not
  explain (0 when the two enter additively);
- feature ``j`` against all others, their equation 46: ``H^2_j = sum_i [F(x_i) - F_j(x_ij) - F_\\j(x_i\\j)]^2
  / sum_i F(x_i)^2``.

Every partial dependence is evaluated at the sample's own values, averaging the forest's output over the
same sample (Friedman 2001, "Greedy function approximation", section 8.2); they are read off the leaves'
boxes (:mod:`~forestlab.analyses.leafboxes`), not predicted for ``N^2`` made-up rows.
"""

from __future__ import annotations

import itertools
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.seeding import root_seed
from .accounts import plain
from .cases import analysis_X
from .dependence import _check_label
from .leafboxes import tree_dependences
from .view import FittedForest

__all__ = ["InteractionStrength", "interaction"]

SHOWN_PAIRS = 10


@dataclass(frozen=True, eq=False)
class InteractionStrength:
    """Friedman & Popescu's (2008) H-statistics of a set of features; prints the strongest pairs.

    Attributes
    ----------
    features : tuple of int
        The feature columns examined.
    names : tuple of str
        Their names.
    pairwise : ndarray of float64, shape (q, q)
        ``H_jk`` (the square root of their equation 44) for every pair, symmetric, NaN on the diagonal; 0 means
        the two enter the forest's output additively, 1 that their joint dependence is all interaction.
    total : ndarray of float64, shape (q,)
        ``H_j`` (the square root of their equation 46): how much of the output's variation comes from
        feature ``j`` acting together with any of all the other features.
    cases : int
        Size of the sample of cases the partial dependences are averaged over.
    label : object or None
        The class whose vote share is examined (classification), or None.
    """

    features: tuple[int, ...]
    names: tuple[str, ...]
    pairwise: NDArray[np.float64]
    total: NDArray[np.float64]
    cases: int
    label: Any

    def pairs(self) -> list[tuple[str, str, float]]:
        """Every pair as ``(name, name, H)``, strongest first (ties keep column order)."""
        found = [(self.names[a], self.names[b], float(self.pairwise[a, b]))
                 for a, b in itertools.combinations(range(len(self.features)), 2)]
        return sorted(found, key=lambda item: -np.nan_to_num(item[2], nan=-1.0))

    def __str__(self) -> str:
        what = "the prediction" if self.label is None else f"the share of votes for {self.label!r}"
        width = max([7] + [len(n) for n in self.names])
        lines = [f"interaction strength (Friedman & Popescu's H) of {what}, over {self.cases} cases",
                 "  pair" + " " * (2 * width + 1) + "H"]
        shown = self.pairs()[:SHOWN_PAIRS]
        for a, b, h in shown:
            lines.append(f"  {a:<{width}} x {b:<{width}}  {h:.3f}")
        if len(self.pairs()) > len(shown):
            lines.append(f"  ... {len(self.pairs()) - len(shown)} more pairs in `pairwise`")
        lines.append(f"  {'feature':<{2 * width + 3}}  H with all others")
        for j in np.argsort(-np.nan_to_num(self.total, nan=-1.0), kind="stable"):
            lines.append(f"  {self.names[j]:<{2 * width + 3}}  {self.total[j]:.3f}")
        return "\n".join(lines)

    __repr__ = __str__


def interaction(forest: FittedForest, features: Any = None, *, X: Any = None, cases: int = 200, label: Any = None,
                rng: Any = None) -> InteractionStrength:
    """Friedman & Popescu's (2008) H-statistic of every pair of ``features`` and of each against all others.

    Called as ``forest.interaction(...)``. Partial dependences are evaluated at, and averaged over, a sample
    of ``cases`` rows drawn without replacement from the training cases (or ``X``).

    Parameters
    ----------
    features : sequence of int or str, optional
        The columns to examine, by position or name (default: all).
    X : array-like or data frame, optional
        The cases to sample from (default: the training cases).
    cases : int, default 200
        Sample size ``N``.
    label : optional
        Classification: the class whose vote share is examined (default: the second of two classes).
    rng : None, int, SeedSequence or Generator
        Draws the sample.

    Returns
    -------
    InteractionStrength

    Notes
    -----
    Cost: per tree, one pass of the ``N`` sample cases down the tree and about ``(2 q + q (q - 1) / 2)``
    passes over a (leaves, N) table, ``q`` the number of features examined: the same as predicting
    ``(2 q + q (q - 1) / 2) N^2`` made-up rows, without making them. Memory: a (leaves, N, p) table of
    booleans per tree.

    Examples
    --------
    >>> import numpy as np, forestlab as fl
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(size=(300, 3))
    >>> y = X[:, 0] * X[:, 1] + X[:, 2]
    >>> forest = fl.Forest(trees=20, rng=1).fit(X, y)
    >>> strength = forest.interaction(cases=40, rng=2)
    >>> strength.pairwise.shape
    (3, 3)
    >>> bool(strength.pairwise[0, 1] > strength.pairwise[0, 2])
    True
    """
    data, _ = analysis_X(forest, X)
    chosen = _check_features(features, forest.feature_names)
    if isinstance(cases, (bool, np.bool_)) or not isinstance(cases, numbers.Integral) or cases < 2:
        raise ValueError(f"`cases` must be an int of at least 2; got {cases!r}")
    code = _check_label(forest, label)
    generator = np.random.default_rng(root_seed(rng))
    n = data.shape[0]
    sample = data[np.sort(generator.choice(n, size=min(int(cases), n), replace=False))]
    whole, single, pairs, rest = _forest_dependences(forest, sample, chosen, code)
    pairwise = np.full((len(chosen), len(chosen)), np.nan)
    for a, b in itertools.combinations(range(len(chosen)), 2):
        joint = pairs[(chosen[a], chosen[b])]
        pairwise[a, b] = pairwise[b, a] = _ratio(joint - single[chosen[a]] - single[chosen[b]], joint)
    total = np.array([_ratio(whole - single[j] - rest[j], whole) for j in chosen])
    return InteractionStrength(features=tuple(chosen), names=tuple(forest.feature_names[j] for j in chosen),
                               pairwise=pairwise, total=total, cases=int(sample.shape[0]),
                               label=None if code is None else plain(forest.classes[code]))


def _check_features(features: Any, names: tuple[str, ...]) -> list[int]:
    if features is None:
        return list(range(len(names)))
    if isinstance(features, (str, numbers.Integral)) or not hasattr(features, "__iter__"):
        raise TypeError(f"`features` must be a sequence of column names or ints; got {type(features).__name__}")
    out = []
    for f in features:
        if isinstance(f, str):
            if f not in names:
                raise ValueError(f"`features` names an unknown column {f!r}; known: {list(names)[:10]}")
            f = names.index(f)
        elif isinstance(f, (bool, np.bool_)) or not isinstance(f, numbers.Integral) or not 0 <= f < len(names):
            raise ValueError(f"`features` must hold column names or ints in [0, {len(names)}); got {f!r}")
        out.append(int(f))
    if len(out) < 2 or len(set(out)) != len(out):
        raise ValueError("`features` must name at least two different columns")
    return out


def _forest_dependences(forest: FittedForest, sample: NDArray[np.float64], chosen: list[int], code: int | None):
    """The forest's output at the sample and its partial dependences (:mod:`~forestlab.analyses.leafboxes`),
    averaged over trees and sample, each centred to mean 0."""
    missing = bool(np.isnan(sample).any())
    total = None
    for tree in forest.trees:
        parts = tree_dependences(tree, sample, chosen, code, missing)
        total = parts if total is None else (total[0] + parts[0], *({key: old[key] + new[key] for key in old}
                                                                    for old, new in zip(total[1:], parts[1:])))
    scale = 1.0 / len(forest.trees)
    whole = _centred(total[0] * scale)
    scale /= sample.shape[0]
    single, pairs, rest = ({key: _centred(value * scale) for key, value in part.items()} for part in total[1:])
    return whole, single, pairs, rest


def _centred(values: NDArray[np.float64]) -> NDArray[np.float64]:
    return values - values.mean()


def _ratio(residual: NDArray[np.float64], joint: NDArray[np.float64]) -> float:
    """sqrt(sum residual^2 / sum joint^2); NaN when the joint dependence is flat."""
    scale = float(np.sum(joint**2))
    return float(np.sqrt(np.sum(residual**2) / scale)) if scale > 0 else float("nan")
