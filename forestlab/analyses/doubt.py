"""The reasons behind each doubtful case: its out-of-bag attributions toward the recorded and the forest's label.

A case that :meth:`OutOfBag.doubtful` lists is one whose out-of-bag trees disagree with its record. Its
attributions by those trees only (each tree explains it only if the case was out-of-bag for it; see
:func:`~forestlab.analyses.attributions.forest_shares`) show which measurements make them disagree: the
*pull* of a feature is its attribution to the vote share of the forest's label less that to the recorded
label (classification), or its attribution to the out-of-bag mean signed toward the forest's side of the
record (regression). A positive pull speaks against the record, a negative one for it.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .accounts import category_labels, plain, shown_value
from .attributions import forest_shares
from .results import DoubtfulCases
from .view import FittedForest

__all__ = ["DoubtReasons", "doubt_reasons"]

SHOWN_CASES = 10


@dataclass(frozen=True, eq=False)
class DoubtReasons:
    """Why the out-of-bag trees doubt each listed case; prints every case's strongest reasons in words.

    Attributes
    ----------
    case : ndarray of intp, shape (k,)
        Training rows, in the order given.
    observed : ndarray, shape (k,)
        The recorded label or value.
    forest : ndarray, shape (k,)
        The out-of-bag label (majority, ties to the lowest class) or mean.
    support : ndarray of float64, shape (k, 2)
        Classification: the out-of-bag vote share of the recorded and of the forest's label.
        Regression: the recorded value and the out-of-bag mean.
    pull : ndarray of float64, shape (k, p)
        Every feature's pull toward the forest's answer and away from the record (see the module notes).
    shares : ndarray of float64, shape (k, p) or (k, p, K)
        The cases' out-of-bag attributions themselves (of every class's vote share, or of the mean).
    coverage : ndarray of int64, shape (k,)
        Out-of-bag trees behind every case.
    names : tuple of str
    shown : tuple of tuple of str
        Every case's feature values as printed.
    task : str
    top : int
        Reasons printed on each side.
    """

    case: NDArray[np.intp]
    observed: NDArray
    forest: NDArray
    support: NDArray[np.float64]
    pull: NDArray[np.float64]
    shares: NDArray[np.float64]
    coverage: NDArray[np.int64]
    names: tuple[str, ...]
    shown: tuple[tuple[str, ...], ...]
    task: str
    top: int = 3

    def __len__(self) -> int:
        return int(self.case.size)

    def reasons(self, i: int) -> list[tuple[str, str, float]]:
        """The ``i``-th listed case's features as ``(name, value, pull)``, strongest pull against the record
        first."""
        order = np.argsort(-self.pull[i], kind="stable")
        return [(self.names[j], self.shown[i][j], float(self.pull[i, j])) for j in order]

    def describe(self, i: int) -> str:
        """The ``i``-th listed case in words."""
        if self.task == "classification":
            head = (f"case {int(self.case[i])}: recorded {plain(self.observed[i])!r}, but "
                    f"{self.support[i, 1]:.0%} of its {int(self.coverage[i])} out-of-bag trees vote "
                    f"{plain(self.forest[i])!r} ({self.support[i, 0]:.0%} for the record)")
        else:
            head = (f"case {int(self.case[i])}: recorded {self.support[i, 0]:.4g}, its {int(self.coverage[i])} "
                    f"out-of-bag trees predict {self.support[i, 1]:.4g}")
        found = self.reasons(i)
        against = [r for r in found if r[2] > 0][:self.top]
        backing = [r for r in reversed(found) if r[2] < 0][:self.top]
        lines = [head]
        lines.append("  speaks against the record: " + (_listed(against) or "nothing"))
        lines.append("  speaks for the record:     " + (_listed(backing) or "nothing"))
        return "\n".join(lines)

    def __str__(self) -> str:
        shown = min(len(self), SHOWN_CASES)
        parts = [self.describe(i) for i in range(shown)]
        if len(self) > shown:
            parts.append(f"... and {len(self) - shown} more cases (call describe(i))")
        return "\n".join(parts) if parts else "no cases to explain"

    __repr__ = __str__


def _listed(reasons: list[tuple[str, str, float]]) -> str:
    return ", ".join(f"{name} = {value} ({pull:+.3f})" for name, value, pull in reasons)


def doubt_reasons(forest: FittedForest, cases: Any, *, top: int = 3) -> DoubtReasons:
    """Explain doubtful training cases by their out-of-bag attributions, as :class:`DoubtReasons`.

    Called as ``forest.doubt_reasons(forest.oob.doubtful(top=10))``. For each case, only the trees that did
    not see it explain it; the pull of a feature is its attribution to the share of votes for the forest's
    label less that for the recorded label (regression: its attribution to the out-of-bag mean, signed
    toward the forest's side of the recorded value), so what pulls hardest is what makes the forest disagree.

    Parameters
    ----------
    cases : DoubtfulCases or sequence of int
        What ``forest.oob.doubtful(...)`` returns, or training row indices.
    top : int, default 3
        Reasons printed on each side.

    Returns
    -------
    DoubtReasons
    """
    X = forest.training_X()
    rows = _check_cases(cases, X.shape[0])
    if isinstance(top, (bool, np.bool_)) or not isinstance(top, numbers.Integral) or top < 1:
        raise ValueError(f"`top` must be a positive int; got {top!r}")
    values, baseline, coverage = forest_shares(forest, X[rows], oob_cases=rows)
    if np.any(coverage == 0):
        raise ValueError(f"case(s) {rows[coverage == 0].tolist()[:5]} were never out-of-bag, so no tree can "
                         "explain them honestly; grow more trees with `add_trees`")
    answer = baseline + values.sum(axis=1)
    y = forest.y
    k = np.arange(rows.size)
    if forest.task == "classification":
        recorded, said = y[rows], np.argmax(answer, axis=1)
        pull = values[k, :, said] - values[k, :, recorded]
        support = np.column_stack([answer[k, recorded], answer[k, said]])
        observed, verdict, shares = forest.classes[recorded], forest.classes[said], values
    else:
        mean = answer[:, 0]
        pull = values[:, :, 0] * np.sign(mean - y[rows])[:, None]
        support = np.column_stack([y[rows], mean])
        observed, verdict, shares = y[rows], mean, values[:, :, 0]
    labels = category_labels(forest)
    shown = tuple(tuple(shown_value(v, labels.get(j)) for j, v in enumerate(x)) for x in X[rows])
    for a in (pull, support, shares, coverage):
        a.flags.writeable = False
    return DoubtReasons(case=rows, observed=observed, forest=verdict, support=support, pull=pull, shares=shares,
                        coverage=coverage, names=forest.feature_names, shown=shown, task=forest.task, top=int(top))


def _check_cases(cases: Any, n: int) -> NDArray[np.intp]:
    if isinstance(cases, DoubtfulCases):
        return np.asarray(cases.case, dtype=np.intp).copy()
    try:
        rows = np.asarray(cases)
    except (TypeError, ValueError):
        raise TypeError("`cases` must be DoubtfulCases or a sequence of int row indices") from None
    if rows.ndim != 1 or (rows.size and rows.dtype.kind not in "iu"):
        raise TypeError(f"`cases` must be DoubtfulCases or a 1-D sequence of int row indices; got {rows.dtype} "
                        f"of shape {rows.shape}")
    if rows.size and (rows.min() < 0 or rows.max() >= n):
        raise ValueError(f"`cases` must be training row indices in [0, {n}); got {rows.min()} .. {rows.max()}")
    return rows.astype(np.intp)
