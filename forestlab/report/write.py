"""``forest.report(path)``: one self-contained HTML page on a fitted forest, to share with people who do not
run Python (pictures need the ``plot`` extra)."""

from __future__ import annotations

import numbers
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np

from .._paths import output_path
from ..modelfile.stored import StoredForest
from ..modelfile.write import stored_oob
from .findings import dependence_section, importance_of, importance_section
from .new_cases import new_cases_section
from .page import Section, page
from .pictures import check_plotting
from .summary import doubtful_section, fit_section, oob_section, votes_section

__all__ = ["CAUTION", "report"]

CAUTION = (
    "Predictions from this forest can feed decisions that affect people: clinical, safety, credit, hiring and "
    "the like. Validate the model on your own data, check how it behaves on the cases that matter to you, and "
    "do not let it replace professional judgement or the rules that apply where you work. The out-of-bag "
    "error describes cases like the training cases; new cases unlike them may fare worse."
)


def report(stored: StoredForest, path: str | PathLike, X_new: Any = None, *, title: str | None = None,
           features: int = 3, cases: int = 20, label: Any = None, rng: Any = 0) -> Path:
    """Write one self-contained HTML page about the fitted forest, to open in any browser or print.

    Called as ``forest.report(path)``; needs ``pip install 'forestlab[plot]'`` for its pictures. The page
    holds what was fit (data shape, settings as given and as grown, the data fingerprint, forestlab version,
    date), the out-of-bag error with its curve and where it settles (:meth:`OutOfBag.settles_at`), the
    confusion table or the residual summary, the doubtful cases, the permutation importance (table and
    picture), partial dependence pictures of the leading predictors, predictions for ``X_new`` when given,
    and a caution about decisions that affect people. Every number is the one the Python objects hold
    (``forest.oob``, ``forest.importance(rng=rng)``, ...), its full value kept in the page's ``data-value``
    attributes. No script, font or picture is fetched: the style sheet is inline and the pictures are SVG
    data.

    Parameters
    ----------
    path : str or os.PathLike
        The file to write (its folder must exist); ``.html`` is the usual suffix.
    X_new : array-like or data frame, optional
        New cases to show the forest's predictions for (as :meth:`Forest.predict` takes them).
    title : str, optional
        The page's title (default: "Random forest: <task>").
    features : int, default 3
        How many of the most important predictors get a dependence picture.
    cases : int, default 20
        Rows shown of the doubtful cases and of the new cases.
    label : optional
        Classification: the class whose vote share the dependence pictures show (default: the second of two
        classes, else the most frequent class).
    rng : None, int, SeedSequence or Generator, default 0
        Seeds the shuffles of the permutation importance (``forest.importance(rng=rng)`` gives the same).

    Returns
    -------
    pathlib.Path
        The file written.
    """
    target = output_path(path)
    view = stored.view
    for name, value in (("features", features), ("cases", cases)):
        if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral) or value < 1:
            raise ValueError(f"`{name}` must be a positive int; got {value!r}")
    if title is not None and not isinstance(title, str):
        raise TypeError(f"`title` must be a str or None; got {type(title).__name__}")
    plot = check_plotting()
    new = None if X_new is None else new_cases_section(view, X_new, int(cases))  # checks X_new before the work
    oob = stored_oob(stored)
    found = importance_of(view, rng)
    sections = [fit_section(stored), oob_section(stored, oob, plot), votes_section(oob),
                doubtful_section(oob, int(cases)), importance_section(found, plot),
                dependence_section(view, found, plot, int(features), label)]
    sections += [new] if new is not None else []
    sections.append(Section("caution", "Before you act on it", f'<p class="caution">{CAUTION}</p>'))
    subtitle = (f"{len(view.trees)} trees on {view.cases} cases and {view.features} features"
                f"{'' if view.classes is None else f', {view.classes.size} classes'}")
    target.write_text(page(title or f"Random forest: {view.task}", subtitle, sections), encoding="utf-8")
    return target

