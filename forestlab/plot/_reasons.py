"""Pictures of why the forest answers as it does: one case's ledger of shares, a feature's cloud of shares
against its values, and the grid of pairwise interaction strengths."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..analyses.accounts import CaseAccount, CaseAttributions, shown_value
from ..analyses.interaction import InteractionStrength
from ._style import INK, MUTED, PALETTE, axes, style

__all__ = ["attribution_cloud", "case_ledger", "interaction_grid"]

RISE, FALL = PALETTE[0], PALETTE[1]


def case_ledger(account: CaseAccount, *, ax: Any = None) -> Any:
    """One case's shares as bars from zero, largest on top, with the rest summed in one bar and the total
    below: the ledger from the baseline (an average training case) to the case's answer.

    Parameters
    ----------
    account : CaseAccount
        From ``forest.attributions(X).case(i)``; its ``top`` features are drawn by name.
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    _expect(account, CaseAccount, "account", "CaseAttributions.case")
    order = account.order[:account.top]
    rest = np.setdiff1d(np.arange(account.shares.size), order)
    names = [f"{account.names[j]} = {account.shown[j]}" for j in order]
    shares = list(account.shares[order])
    colours = [RISE if s > 0 else FALL for s in shares]
    if rest.size:
        names.append(f"{rest.size} other features")
        shares.append(float(account.shares[rest].sum()))
        colours.append(MUTED)
    names.append("all shares together")
    shares.append(float(account.shares.sum()))
    colours.append(INK)
    rows = np.arange(len(shares))[::-1]
    ax = axes(ax, (6.4, max(2.4, 0.36 * len(shares) + 1.4)))
    ax.barh(rows, shares, height=0.58, color=colours)
    ax.set_yticks(rows, names)
    ax.axvline(0.0, color=MUTED, linewidth=0.8)
    ax.axhline(0.5, color=MUTED, linewidth=0.6, linestyle=":")
    style(ax, f"Case {account.case}: from {account.baseline:.3g} to {account.answer:.3g}",
          f"attribution ({account.output}; average case {account.baseline:.3g})", "",
          grid_axis="x")
    return ax


def attribution_cloud(result: CaseAttributions, feature: int | str, colour_by: int | str | None = None, *,
                      label: Any = None, ax: Any = None) -> Any:
    """Every case's share for one feature against the feature's value, as a cloud of points coloured by the
    third of the cases a second feature's value falls in, with the median share along the values.

    Parameters
    ----------
    result : CaseAttributions
        From :meth:`Forest.attributions`.
    feature, colour_by : int or str
        The feature on the x axis, and the one whose low / middle / high third colours the points.
    label : optional
        Classification: the class whose vote share the shares are of (default: the second of two).
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    _expect(result, CaseAttributions, "result", "Forest.attributions")
    j = _column(feature, result.feature_names, "feature")
    shares = result.of(label)[:, j]
    x = result.X[:, j]
    seen = ~np.isnan(x) & ~np.isnan(shares)
    ax = axes(ax)
    if colour_by is None:
        ax.scatter(x[seen], shares[seen], s=12, color=PALETTE[0], alpha=0.7, linewidths=0)
    else:
        c = _column(colour_by, result.feature_names, "colour_by")
        other = result.X[:, c]
        edges = np.nanquantile(other, [1 / 3, 2 / 3]) if np.any(~np.isnan(other)) else np.zeros(2)
        third = np.where(np.isnan(other), -1, np.searchsorted(edges, other, side="right"))
        for k, word in enumerate(("low", "middle", "high")):
            mine = seen & (third == k)
            ax.scatter(x[mine], shares[mine], s=12, color=PALETTE[(0, 2, 1)[k]], alpha=0.7, linewidths=0,
                       label=f"{word} {result.feature_names[c]}")
        ax.legend(frameon=False, fontsize=9, markerscale=1.5)
    _median_line(ax, x[seen], shares[seen])
    if j in result.labels:
        codes = np.arange(len(result.labels[j]))
        ax.set_xticks(codes, [shown_value(v, result.labels[j]) for v in codes.astype(float)])
    ax.axhline(0.0, color=MUTED, linewidth=0.8)
    name = result.feature_names[j]
    style(ax, f"Shares of {name}, case by case", name, f"share of {name}", grid_axis="both")
    return ax


def interaction_grid(strength: InteractionStrength, *, ax: Any = None) -> Any:
    """Friedman & Popescu's H of every pair as the lower triangle of a grid of shaded, numbered cells, with
    each feature's H against all others written in its diagonal cell.

    Parameters
    ----------
    strength : InteractionStrength
        From :meth:`Forest.interaction`.
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    _expect(strength, InteractionStrength, "strength", "Forest.interaction")
    q = len(strength.features)
    shown = np.where(np.tril(np.ones((q, q), dtype=bool), k=-1), strength.pairwise, np.nan)
    ax = axes(ax, (1.0 + 0.6 * q, 0.8 + 0.55 * q))
    top = float(np.nanmax(shown)) if np.any(~np.isnan(shown)) else 1.0
    image = ax.imshow(shown, cmap="cividis", vmin=0.0, vmax=max(top, 1e-12))
    ax.figure.colorbar(image, ax=ax, label="H", shrink=0.8)
    for a in range(q):
        ax.text(a, a, f"{strength.total[a]:.2f}", ha="center", va="center", fontsize=8, color=INK,
                fontstyle="italic")
        for b in range(a):
            h = shown[a, b]
            ax.text(b, a, f"{h:.2f}", ha="center", va="center", fontsize=8,
                    color="white" if h < 0.6 * top else INK)
    ax.set_xticks(range(q), strength.names, rotation=45, ha="right")
    ax.set_yticks(range(q), strength.names)
    style(ax, "Interaction strength H", "", "", grid_axis=None)
    ax.set_xlabel("diagonal: with all others", color=MUTED, fontsize=8)
    return ax


def _expect(value: Any, kind: type, name: str, source: str) -> None:
    if not isinstance(value, kind):
        raise TypeError(f"`{name}` must be the {kind.__name__} of {source}; got {type(value).__name__}")


def _column(feature: Any, names: tuple[str, ...], name: str) -> int:
    if isinstance(feature, str):
        if feature not in names:
            raise ValueError(f"`{name}` names an unknown feature {feature!r}; known: {list(names)[:10]}")
        return names.index(feature)
    if isinstance(feature, (bool, np.bool_)) or not isinstance(feature, (int, np.integer)) \
            or not 0 <= feature < len(names):
        raise ValueError(f"`{name}` must be a feature name or an int in [0, {len(names)}); got {feature!r}")
    return int(feature)


def _median_line(ax: Any, x: np.ndarray, shares: np.ndarray, bins: int = 20) -> None:
    """The median share in (up to) ``bins`` groups of equally many cases along the values."""
    if x.size < 2:
        return
    order = np.argsort(x, kind="stable")
    groups = np.array_split(order, min(bins, x.size))
    centres = [float(np.median(x[g])) for g in groups if g.size]
    middles = [float(np.median(shares[g])) for g in groups if g.size]
    ax.plot(centres, middles, color=INK, linewidth=1.8, label="_median")
