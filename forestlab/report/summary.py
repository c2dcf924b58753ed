"""The report's account of the fit: what was fit, the out-of-bag error, how the votes fall, the doubtful cases.

Every figure is read from the objects the user has (the stored settings and provenance, ``forest.oob``), so the
page says what Python says.
"""

from __future__ import annotations

import dataclasses
from datetime import datetime, timezone

import numpy as np

from .._version import __version__
from ..analyses.results import OutOfBag
from ..modelfile.stored import StoredForest
from .page import Section, figure, key_figures, table, text
from .pictures import svg

__all__ = ["SETTLE_TOLERANCE", "doubtful_section", "fit_section", "oob_section", "votes_section"]

SETTLE_TOLERANCE = 0.05   # OutOfBag.settles_at: the curve stays within 5% of the final error
HOW_RUN = {"workers", "executor", "progress"}   # settings of how the trees were grown, not of what was grown


def fit_section(stored: StoredForest, written: datetime | None = None) -> Section:
    """What was fit: data shape, task and classes, the settings as given and as grown, provenance."""
    view, grown = stored.view, stored.provenance
    written = written or datetime.now(timezone.utc).astimezone()
    facts = [("task", view.task), ("cases", view.cases), ("features", view.features), ("trees", len(view.trees))]
    if view.classes is not None:
        names = [str(c) for c in view.classes.tolist()]
        if view.has_data:
            counts = np.bincount(view.y, minlength=len(names))
            names = [f"{c} ({k} cases)" for c, k in zip(names, counts.tolist())]
        facts.append(("classes", ", ".join(names)))
    facts += [("data fingerprint (SHA-256)", grown.fingerprint), ("root seed entropy", grown.seed.entropy),
              ("forestlab version", __version__), ("report written", written.isoformat(timespec="seconds"))]
    body = (key_figures("fit-figures", [("cases", view.cases, ""), ("features", view.features, ""),
                                         ("trees", len(view.trees), ""), ("task", view.task, "")])
            + table("fit-facts", ["item", "value"], facts, facts=True)
            + table("settings", ["setting", "as given", "as grown"], _settings_rows(stored),
                    caption="Constructor settings (None: the task's default), and what the fit resolved them to")
            + table("features", ["feature", "kind", "missing in training"], _feature_rows(stored)))
    return Section("fit", "What was fit", body)


def _settings_rows(stored: StoredForest) -> list[tuple]:
    grown = {f.name: getattr(stored.provenance.rules, f.name) for f in dataclasses.fields(stored.provenance.rules)}
    grown |= {f.name: getattr(stored.provenance, f.name) for f in dataclasses.fields(stored.provenance)
              if f.name not in ("rules", "seed", "fingerprint")}
    return [(f.name, repr(getattr(stored.settings, f.name)), repr(grown[f.name]) if f.name in grown else "")
            for f in dataclasses.fields(stored.settings) if f.name not in HOW_RUN]


def _feature_rows(stored: StoredForest) -> list[tuple]:
    view = stored.view
    missing = np.isnan(view.X).sum(axis=0) if view.has_data else [None] * view.features
    return [(name, f"categorical, {view.levels[j].size} categories" if j in view.levels else "numeric",
             "not kept" if missing[j] is None else int(missing[j])) for j, name in enumerate(view.feature_names)]


def oob_section(stored: StoredForest, oob: OutOfBag | None, plot) -> Section:
    """The out-of-bag error, its curve as trees are added and where it settles."""
    if oob is None:
        return Section("oob", "Out-of-bag error", _absent("the out-of-bag results"))
    classification = oob.task == "classification"
    settles = oob.settles_at(SETTLE_TOLERANCE)
    trees = oob.error_curve.size
    tiles = [("misclassification rate" if classification else "mean squared error", oob.error, "out-of-bag"),
             ("settles at", settles, f"trees (within {SETTLE_TOLERANCE:.0%} of the final error)")]
    if classification:
        tiles += [("strength", oob.strength, "mean margin"), ("correlation", oob.correlation, "of the trees")]
    else:
        tiles += [("explained variance", oob.explained_variance, "1 - error / var(y)")]
    tiles.append(("never out-of-bag", int(np.count_nonzero(oob.coverage == 0)), "cases left out of the error"))

    def draw(ax):
        plot.error_curve(oob.error_curve, ax=ax)
        ax.axvline(settles, color="#d9892b", linewidth=1.2, linestyle="--", label=f"settles at {settles} trees")
        ax.legend(frameon=False, fontsize=9)

    advice = ("it has not levelled off: grow more trees (forest.add_trees)" if settles > 0.9 * trees
              else "more trees would change it little")
    lead = (f'<p class="lead">The error of the first b trees, each case voted on only by the trees it was not '
            f"drawn for. It stays within {SETTLE_TOLERANCE:.0%} of its final value from {settles} of the {trees} "
            f"trees on; {text(advice)}.</p>")
    picture = figure("oob-curve", svg(draw), "Out-of-bag error against the number of trees, with the point "
                     "where it settles marked", "Out-of-bag error as trees are added; the dashed line marks "
                     "where the curve settles.")
    return Section("oob", "Out-of-bag error", key_figures("oob-figures", tiles) + lead + picture)


def votes_section(oob: OutOfBag | None) -> Section:
    """The confusion table (classification) or the residual summary (regression), out-of-bag."""
    if oob is None:
        return Section("votes", "How the out-of-bag predictions fall", _absent("the out-of-bag results"))
    if oob.task == "classification":
        labels = [str(c) for c in oob.classes.tolist()]
        rows = [(labels[i], *oob.confusion[i].tolist(), int(oob.confusion[i].sum()), float(oob.by_class[i]))
                for i in range(len(labels))]
        body = ('<p class="lead">Rows: the recorded class; columns: the out-of-bag vote. The diagonal holds the '
                "cases the forest gets right without having seen them.</p>"
                + table("confusion", ["recorded \\ voted", *labels, "cases", "error rate"], rows))
        return Section("votes", "How the out-of-bag votes fall", body)
    residuals = oob.residuals[oob.coverage > 0]
    points = (0.0, 0.05, 0.25, 0.5, 0.75, 0.95, 1.0)
    rows = [("cases with an out-of-bag prediction", int(residuals.size)),
            ("mean residual (observed - predicted)", float(residuals.mean())),
            ("root mean squared residual", float(np.sqrt(np.mean(residuals**2)))),
            ("mean absolute residual", float(np.mean(np.abs(residuals))))]
    rows += [(f"{q:.0%} quantile", float(v)) for q, v in zip(points, np.quantile(residuals, points))]
    body = ('<p class="lead">Residuals of the out-of-bag means, observed minus predicted.</p>'
            + table("residuals", ["quantity", "value"], rows))
    return Section("votes", "Out-of-bag residuals", body)


def doubtful_section(oob: OutOfBag | None, rows: int) -> Section:
    """The cases to look at first, as ``oob.doubtful`` lists them."""
    if oob is None:
        return Section("doubtful", "Cases to look at first", _absent("the out-of-bag results"))
    classification = oob.task == "classification"
    cases = oob.doubtful() if classification else oob.doubtful(threshold=2.0)
    shown = min(rows, len(cases))
    head = ["case", "recorded", "out-of-bag vote" if classification else "out-of-bag mean",
            "margin" if classification else "z margin", "out-of-bag trees"]
    body = (f'<p class="lead">{len(cases)} case(s) with {text(cases.rule)}, most doubtful first'
            f"{f'; the first {shown} shown' if shown < len(cases) else ''}. Possible recording errors, unusual "
            "cases or cases on a boundary: worth a second look before anything else.</p>"
            + table("doubtful-table", head, list(zip(cases.case[:shown].tolist(), _plain(cases.observed[:shown]),
                                                _plain(cases.out_of_bag[:shown]), cases.margin[:shown].tolist(),
                                                cases.coverage[:shown].tolist()))))
    return Section("doubtful", "Cases to look at first", body)


def _plain(values: np.ndarray) -> list:
    """Labels as text, values as floats."""
    return [float(v) if isinstance(v, float) else str(v) for v in values.tolist()]


def _absent(what: str, why: str = "the forest was loaded without its training data") -> str:
    return f'<p class="lead">Not available: {text(why)}, so {text(what)} cannot be computed.</p>'

