"""Result classes of the attributions: every case's account, one case's reasons in words, the overall weight."""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .importance import Importance
from .view import FittedForest

__all__ = ["CaseAccount", "CaseAttributions", "OverallWeight", "category_labels", "plain", "shown_value"]

BAR_WIDTH = 20


def category_labels(forest: FittedForest) -> dict[int, tuple[str, ...]]:
    """The label of every category code of every categorical feature, as printed."""
    out = {}
    for j, values in forest.levels.items():
        frame = forest.frame_labels.get(forest.feature_names[j])
        out[j] = tuple(str(frame[int(v)]) if frame is not None else f"{v:g}" for v in values)
    return out


def plain(label: Any) -> Any:
    """A class label as a plain Python value (so it prints as ``'rework'``, not as a NumPy scalar)."""
    return label.item() if isinstance(label, np.generic) else label


def shown_value(value: float, labels: tuple[str, ...] | None) -> str:
    """A predictor value as printed: its category label, ``missing`` for NaN, else 4 significant digits."""
    if np.isnan(value):
        return "missing"
    if labels is not None:
        return labels[int(value)]
    return f"{value:.4g}"


@dataclass(frozen=True, eq=False)
class CaseAccount:
    """One case's answer from the forest, shared out among its features; prints the largest shares in words.

    Attributes
    ----------
    case : int
        Row of the explained data.
    names : tuple of str
        Feature names.
    shown : tuple of str
        The case's value of every feature as printed (category labels, ``missing`` for NaN).
    shares : ndarray of float64, shape (p,)
        The attribution of every feature.
    baseline : float
        Where every case starts: the forest's expected output over its training cases.
    answer : float
        The forest's output for the case: ``baseline + shares.sum()``.
    output : str
        What the output is, in words (``"predicted value"`` or ``"share of votes for 'x'"``).
    top : int
        How many features the print lists by name (the rest are summed in one line).
    """

    case: int
    names: tuple[str, ...]
    shown: tuple[str, ...]
    shares: NDArray[np.float64]
    baseline: float
    answer: float
    output: str
    top: int = 5

    @property
    def order(self) -> NDArray[np.intp]:
        """Features from the largest to the smallest absolute share (ties keep column order)."""
        return np.argsort(-np.abs(self.shares), kind="stable")

    def __str__(self) -> str:
        order = self.order[:self.top]
        rest = np.setdiff1d(np.arange(self.shares.size), order)
        answer = 0.0 if abs(self.answer) < 1e-12 else self.answer      # a vote share of 0 less rounding
        lines = [f"case {self.case}: {self.output} {answer:.4g}, against {self.baseline:.4g} for an average "
                 "training case"]
        width = max([7] + [len(self.names[j]) for j in order])
        value_width = max([5] + [len(self.shown[j]) for j in order])
        largest = float(np.max(np.abs(self.shares))) if self.shares.size else 0.0
        for j in order:
            s = float(self.shares[j])
            bar = ("+" if s > 0 else "-") * int(round(BAR_WIDTH * abs(s) / largest)) if largest > 0 else ""
            lines.append(f"  {self.names[j]:<{width}} = {self.shown[j]:<{value_width}}  {s:+.4f}  {bar}")
        if rest.size:
            lines.append(f"  {f'{rest.size} other features':<{width + value_width + 3}}  "
                         f"{float(self.shares[rest].sum()):+.4f}")
        return "\n".join(lines)

    __repr__ = __str__


@dataclass(frozen=True, eq=False)
class OverallWeight:
    """How much each feature moves the forest's answers on average, beside permutation importance if given.

    Attributes
    ----------
    names : tuple of str
    weight : ndarray of float64, shape (p,)
        Mean over cases of the absolute attribution (classification: half the sum over classes of the
        absolute attributions of the vote shares, i.e. how far the feature moves the vote, for two classes
        the absolute attribution of either class).
    importance : Importance or None
        Permutation importance of the same forest, printed beside ``weight``.
    """

    names: tuple[str, ...]
    weight: NDArray[np.float64]
    importance: Importance | None = None

    def __str__(self) -> str:
        order = np.argsort(-self.weight, kind="stable")
        total = float(self.weight.sum())
        width = max([7] + [len(n) for n in self.names])
        head = f"  {'feature':<{width}}  {'mean |share|':>12}  {'of all':>6}"
        if self.importance is not None:
            head += f"  {'permutation':>11}  {'rank':>4}"
            rank = np.empty(len(self.importance.names), dtype=np.int64)
            rank[self.importance.ranking] = np.arange(1, rank.size + 1)
            position = {name: k for k, name in enumerate(self.importance.names)}
        lines = ["how far each feature moves the forest's answers, on average over the explained cases", head]
        for j in order:
            part = self.weight[j] / total if total > 0 else 0.0
            line = f"  {self.names[j]:<{width}}  {self.weight[j]:>12.4g}  {part:>6.1%}"
            if self.importance is not None and self.names[j] in position:
                k = position[self.names[j]]
                line += f"  {self.importance.scores[k]:>11.4g}  {rank[k]:>4}"
            lines.append(line)
        return "\n".join(lines)

    __repr__ = __str__


@dataclass(frozen=True, eq=False)
class CaseAttributions:
    """Every explained case's output shared out among the features (see :meth:`Forest.attributions`).

    Attributes
    ----------
    values : ndarray of float64, shape (n, p) or (n, p, K)
        Attribution of every feature for every case: to the predicted value (regression) or to every class's
        share of the votes (classification, classes in the order of :attr:`classes`).
    baseline : ndarray of float64, shape (n,) or (n, K)
        Where each case starts: the expected output of its trees over their training cases (the same for
        every case unless :attr:`oob`).
    X : ndarray of float64, shape (n, p)
        The explained cases as the trees saw them (category codes).
    feature_names : tuple of str
    classes : ndarray or None
        Class labels (None for regression).
    coverage : ndarray of int64, shape (n,)
        Trees behind every case (all trees, or the out-of-bag ones; 0 gives NaN values).
    oob : bool
        Whether every case was explained by its out-of-bag trees only.
    labels : dict of int to tuple of str
        Category labels of the categorical features, for printing.
    """

    values: NDArray[np.float64]
    baseline: NDArray[np.float64]
    X: NDArray[np.float64]
    feature_names: tuple[str, ...]
    classes: NDArray | None
    coverage: NDArray[np.int64]
    oob: bool
    labels: dict[int, tuple[str, ...]]

    @classmethod
    def build(cls, forest: FittedForest, X: NDArray, values: NDArray, baseline: NDArray, coverage: NDArray,
              oob: bool) -> CaseAttributions:
        """The result of ``forest_shares``: regression drops the class axis."""
        if forest.task == "regression":
            values, baseline = values[..., 0], baseline[:, 0]
        for a in (values, baseline, coverage):
            a.flags.writeable = False
        return cls(values=values, baseline=baseline, X=X, feature_names=forest.feature_names,
                   classes=forest.classes, coverage=coverage, oob=oob, labels=category_labels(forest))

    @property
    def predictions(self) -> NDArray[np.float64]:
        """``baseline + values.sum(axis=1)``: the forest's (out-of-bag) prediction or vote shares."""
        return self.baseline + self.values.sum(axis=1)

    def __len__(self) -> int:
        return int(self.values.shape[0])

    def __repr__(self) -> str:
        what = "vote shares of " + str(self.classes.size) + " classes" if self.classes is not None else "mean"
        return (f"CaseAttributions({len(self)} cases x {len(self.feature_names)} features, {what}"
                f"{', out-of-bag trees' if self.oob else ''})")

    def class_column(self, label: Any) -> int:
        """Column of class ``label`` (the second class of two when None)."""
        if self.classes is None:
            if label is not None:
                raise ValueError("`label` is for classification forests; this forest does regression")
            return 0
        if label is None:
            if self.classes.size != 2:
                raise ValueError(f"`label` must name the class whose share to show; one of {self.classes.tolist()}")
            return 1
        hits = np.flatnonzero(self.classes == label)
        if hits.size == 0:
            raise ValueError(f"`label` must be one of {self.classes.tolist()}; got {label!r}")
        return int(hits[0])

    def of(self, label: Any = None) -> NDArray[np.float64]:
        """Attributions (n, p) to the output of class ``label`` (classification) or the prediction."""
        return self.values if self.classes is None else self.values[:, :, self.class_column(label)]

    def case(self, i: int, *, label: Any = None, top: int = 5) -> CaseAccount:
        """Case ``i``'s account: its features sorted by the size of their share, printable in words."""
        n = len(self)
        if isinstance(i, (bool, np.bool_)) or not isinstance(i, numbers.Integral) or not -n <= i < n:
            raise ValueError(f"`i` must be an int case index in [0, {n}); got {i!r}")
        if isinstance(top, (bool, np.bool_)) or not isinstance(top, numbers.Integral) or top < 1:
            raise ValueError(f"`top` must be a positive int; got {top!r}")
        i = int(i) % n
        column = self.class_column(label)
        shares = self.of(label)[i]
        base = float(self.baseline[i] if self.classes is None else self.baseline[i, column])
        output = "predicted value" if self.classes is None else f"share of votes for {plain(self.classes[column])!r}"
        if self.oob:
            output = "out-of-bag " + output
        shown = tuple(shown_value(v, self.labels.get(j)) for j, v in enumerate(self.X[i]))
        return CaseAccount(case=i, names=self.feature_names, shown=shown, shares=shares.copy(), baseline=base,
                           answer=base + float(shares.sum()), output=output, top=int(top))

    def overall(self, importance: Importance | None = None) -> OverallWeight:
        """Mean absolute attribution per feature over the cases (NaN cases left out), beside ``importance``
        (e.g. ``forest.importance()``) when given."""
        if importance is not None and not isinstance(importance, Importance):
            raise TypeError(f"`importance` must be an Importance from Forest.importance; got "
                            f"{type(importance).__name__}")
        seen = self.coverage > 0
        size = np.abs(self.values[seen])
        weight = size.mean(axis=0) if self.classes is None else size.sum(axis=2).mean(axis=0) / 2.0
        return OverallWeight(names=self.feature_names, weight=weight, importance=importance)
