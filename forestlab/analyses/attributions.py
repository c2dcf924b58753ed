"""Why the forest gives a case its answer: exact per-case attributions (path-dependent Shapley values).

Every tree's output for a row is shared out among the features exactly, by the Shapley values of the game
of Lundberg, Erion, Chen et al. (2020), "From local explanations to global understanding with explainable AI
for trees", Nature Machine Intelligence 2 (the path-dependent conditional expectation: features outside a
coalition follow the training cases down both sides of their splits). The forest's attribution is the mean
over its trees; the baseline is the forest's expected output over its training cases as the trees saw them
(every leaf weighted by its share of the bootstrap-weighted cases), so for every row the attributions plus
the baseline equal the prediction. How one tree is computed: :mod:`forestlab.analyses.shapley`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from .accounts import CaseAttributions
from .cases import analysis_X
from .shapley import block_rows, tree_game, tree_shares
from .view import FittedForest

__all__ = ["BLOCK_VALUES", "attributions", "forest_shares"]

# float64 values of the passes' arrays for one block of rows (20 MB): on the machine of record, blocks of this
# size ran 10-15% faster than twice as large ones on fully grown trees (their arrays stay nearer the cache)
BLOCK_VALUES = 2_500_000


def attributions(forest: FittedForest, X: Any = None, *, oob: bool = False) -> CaseAttributions:
    """Exact attribution of the forest's output for every row to every feature, as :class:`CaseAttributions`.

    Called as ``forest.attributions(...)``. For regression the output is the predicted mean; for
    classification every class's share of the votes. Attribution ``values[i, j]`` is the Shapley value of
    feature ``j`` in the path-dependent game of Lundberg, Erion, Chen et al. (2020, Nature Machine
    Intelligence 2), averaged over the trees; ``baseline + values.sum(axis=1)`` equals the prediction on
    every row (to rounding). Missing values and categories follow the routes prediction takes. A feature the
    trees never split on gets 0. Where the trees split on only one of two identical columns (the split search
    gives exact ties to the lower column), that column gets the whole share: attributions describe how the
    trees use the columns, not how the data relate them.

    Parameters
    ----------
    X : array-like or data frame, optional
        The rows to explain (default: the training cases).
    oob : bool, default False
        Explain every training case by the trees for which it was out-of-bag only, with their own
        baseline; the attributions then add up to the out-of-bag prediction (vote shares or mean). Cases
        never out-of-bag get NaN. Needs the training data and no ``X``.

    Returns
    -------
    CaseAttributions

    Notes
    -----
    Cost: one pass down and one up every tree for all rows of a block together, about ``nodes * m`` values
    per row and tree with ``m = ceil(d / 2)`` quadrature points, ``d`` the most distinct features on a path
    (at most ``min(depth, p)``); classification multiplies the upward pass by the number of classes less one.
    Memory: blocks of rows of about 20 MB of working arrays per tree, plus the result.

    Examples
    --------
    >>> import numpy as np, forestlab as fl
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(size=(200, 3))
    >>> y = 4 * X[:, 0] + X[:, 1] + rng.normal(0, 0.1, 200)
    >>> forest = fl.Forest(trees=20, rng=1).fit(X, y)
    >>> result = forest.attributions(X[:5])
    >>> result.values.shape
    (5, 3)
    >>> bool(np.allclose(result.baseline + result.values.sum(axis=1), forest.predict(X[:5])))
    True
    """
    if not isinstance(oob, (bool, np.bool_)):
        raise TypeError(f"`oob` must be True or False; got {type(oob).__name__}")
    data, training = analysis_X(forest, X)
    if oob and not training:
        raise ValueError("`oob=True` explains the training cases by the trees that did not see them; "
                         "pass no `X`")
    cases = np.arange(data.shape[0]) if oob else None
    values, baseline, coverage = forest_shares(forest, data, cases)
    return CaseAttributions.build(forest, data, values, baseline, coverage, oob=bool(oob))


def forest_shares(forest: FittedForest, X: NDArray[np.float64], oob_cases: NDArray[np.intp] | None = None,
                  budget: int = BLOCK_VALUES) -> tuple[NDArray, NDArray, NDArray[np.int64]]:
    """Mean over trees of the trees' Shapley values (rows, p, k) and baselines (rows, k), and the number of
    trees behind every row.

    With ``oob_cases`` (training case indices, one per row of ``X``), each row is explained only by the trees
    for which its case was out-of-bag; rows with no such tree get NaN.
    """
    rows, p = X.shape
    classes = None if forest.task == "regression" else int(forest.classes.size)
    k = classes or 1
    values = np.zeros((rows, p, k))
    baseline = np.zeros((rows, k))
    coverage = np.zeros(rows, dtype=np.int64)
    missing = bool(np.isnan(X).any())
    everyone = np.arange(rows)
    scratch = np.empty(budget + 4 * max(tree.nodes for tree in forest.trees))   # one buffer for every block
    for b, tree in enumerate(forest.trees):
        game = tree_game(tree, p, classes)
        mine = everyone if oob_cases is None else np.flatnonzero(forest.inbag[b, oob_cases] == 0)
        step = block_rows(game, budget)
        for start in range(0, mine.size, step):
            if oob_cases is None:
                block = slice(start, min(start + step, rows))
            else:
                block = mine[start:start + step]
            values[block, :, k - game.outputs.shape[1]:] += tree_shares(game, X[block], missing, scratch)
        baseline[mine] += game.baseline
        coverage[mine] += 1
    if classes is not None:
        values[:, :, 0] = -values[:, :, 1:].sum(axis=2)     # vote shares sum to 1, so their shares sum to 0
    seen = coverage > 0
    values[seen] /= coverage[seen, None, None]
    baseline[seen] /= coverage[seen, None]
    values[~seen] = np.nan
    baseline[~seen] = np.nan
    return values, baseline, coverage
