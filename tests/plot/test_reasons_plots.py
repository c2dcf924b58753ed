"""Pictures of attributions and interactions (forestlab.plot): drawn off screen with Agg, checked by their data."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("matplotlib").use("Agg")
import forestlab as fl  # noqa: E402
import forestlab.plot as flp  # noqa: E402
from matplotlib import pyplot  # noqa: E402


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    pyplot.close("all")


@pytest.fixture(scope="module")
def explained():
    rng = np.random.default_rng(4)
    X = rng.normal(size=(150, 4))
    y = 3 * X[:, 0] + X[:, 1] * X[:, 2] + rng.normal(0, 0.1, 150)
    forest = fl.Forest(trees=15, rng=5).fit(X, y)
    return forest, forest.attributions(X), X


def test_case_ledger_bars(explained):
    _, result, _ = explained
    account = result.case(3, top=2)
    ax = flp.case_ledger(account)
    widths = [patch.get_width() for patch in ax.patches]
    order = np.argsort(-np.abs(result.values[3]), kind="stable")
    assert np.allclose(widths[:2], result.values[3, order[:2]])
    assert widths[2] == pytest.approx(result.values[3, order[2:]].sum())
    assert widths[3] == pytest.approx(result.values[3].sum())
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert labels[-2:] == ["2 other features", "all shares together"]
    assert ax.get_title(loc="left") == f"Case 3: from {account.baseline:.3g} to {account.answer:.3g}"
    with pytest.raises(TypeError, match="`account` must be the CaseAccount of CaseAttributions.case"):
        flp.case_ledger(result)


def test_attribution_cloud_points(explained):
    _, result, X = explained
    ax = flp.attribution_cloud(result, "x0", "x1")
    points = np.concatenate([c.get_offsets() for c in ax.collections])
    assert points.shape == (150, 2)
    assert np.allclose(np.sort(points[:, 0]), np.sort(X[:, 0]))
    assert [t.get_text() for t in ax.get_legend().get_texts()] == ["low x1", "middle x1", "high x1"]
    assert len(flp.attribution_cloud(result, 2).collections) == 1
    with pytest.raises(ValueError, match="unknown feature 'z'"):
        flp.attribution_cloud(result, "z")


def test_interaction_grid_cells(explained):
    forest, _, _ = explained
    strength = forest.interaction(cases=20, rng=1)
    ax = flp.interaction_grid(strength)
    shown = ax.images[0].get_array()
    assert shown[0, 1] is np.ma.masked and shown[1, 0] == pytest.approx(strength.pairwise[1, 0])
    texts = [t.get_text() for t in ax.texts]
    assert len(texts) == 4 + 6 and f"{strength.total[0]:.2f}" in texts
    with pytest.raises(TypeError, match="`strength` must be the InteractionStrength of Forest.interaction"):
        flp.interaction_grid(None)
