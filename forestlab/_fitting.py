"""What ``Forest.fit``, ``add_trees`` and ``load`` do, step by step, for the front door.

A fit takes the data through intake (tables, validation, category codes, weights), resolves the settings to
growth rules, presorts once (the engine's :class:`~forestlab.engine.presort.TrainingData`) and hands the
trees to execution in blocks. What comes out is a :class:`~forestlab.analyses.view.FittedForest` (what the
analyses read), a :class:`~forestlab.intake.settings.Provenance` (how the trees were grown) and the
presorted data, kept to grow more trees.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from .analyses.view import MSG_NO_DATA, FittedForest
from .engine.grow import grow_batch
from .engine.presort import TrainingData, presort
from .engine.seeding import root_seed, tree_seed
from .engine.splitter import CartSplitter
from .engine.tree import Tree
from .execution.parallel import grow_trees
from .intake.categories import encode_columns
from .intake.fingerprint import check_same_data, data_fingerprint
from .intake.memory import check_memory
from .intake.settings import Provenance, Settings, check_class_options, priors_and_factors, resolve_rules, task_for
from .intake.tables import default_names, read_table
from .intake.validation import check_splitter_output, check_X, check_y, resolve_categorical
from .intake.weights import check_weights, growth_weights
from .modelfile.stored import growth_blocker

__all__ = ["BATCH_ITEMS", "MAX_BATCH", "grow", "more_of_the_same", "prepare", "regrow", "training_data"]

# Trees grown together in one batch hold about this many (tree, row) items; batching pays at small n.
# 2**17 rather than 2**16 (Ice Lake, paired in one process): twonorm n = 10 000 0.90x, 10 classes n = 16 000
# 0.96x; 2**18 and more lost again (1.03x, 1.18x at 10 classes).
BATCH_ITEMS = 131_072
MAX_BATCH = 64


def prepare(settings: Settings, rng: Any, X: Any, y: Any,
            weights: Any) -> tuple[FittedForest, Provenance, TrainingData]:
    """Intake and presort for a fit: the view (no trees yet), the provenance and the presorted data."""
    values, names, labels = read_table(X)
    X = check_X(values)
    if X.shape[0] < 2:
        raise ValueError(f"`X` must have at least 2 rows to grow a tree; got {X.shape[0]}")
    target = check_y(y, X.shape[0], task_for(settings))
    case_weights = check_weights(weights, X.shape[0])
    check_class_options(settings, target)
    rules = resolve_rules(settings, target, X.shape)
    columns = resolve_categorical(settings.categorical, X.shape[1], None if names is None else list(names),
                                  frame=labels)
    X, levels = encode_columns(X, columns)
    priors, factors = priors_and_factors(settings, target, case_weights)
    view = FittedForest(task=target.task, trees=(), inbag=np.zeros((0, X.shape[0]), dtype=np.uint8),
                        classes=target.classes, feature_names=names if names is not None else default_names(X.shape[1]),
                        levels=levels, frame_labels=labels, case_weights=case_weights, X=X, y=target.values,
                        replace=rules.replace, balance=settings.balance)
    provenance = Provenance(rules=rules, seed=root_seed(rng),
                            fingerprint=data_fingerprint(X, target.values, case_weights), class_priors=priors,
                            class_factors=factors)
    return view, provenance, training_data(view, provenance, settings.balance)


def training_data(view: FittedForest, provenance: Provenance, balance: str | None) -> TrainingData | None:
    """The presorted training data to grow trees with, or None when the view keeps no data or the splitter
    is a component the model file could not rebuild."""
    splitter = provenance.rules.splitter
    if not view.has_data or growth_blocker(provenance.rules) is not None or not isinstance(splitter, CartSplitter):
        return None
    target = view.target
    stats = check_splitter_output(splitter, target)
    K = 0 if view.classes is None else view.classes.size
    factors = None if provenance.class_factors is None else np.array(list(provenance.class_factors.values()))
    categories = np.zeros(view.features, dtype=np.int64)
    for j, values in view.levels.items():
        categories[j] = values.size
    return presort(np.ascontiguousarray(view.X), view.y, stats, K, categories,
                   growth_weights(view.case_weights, factors, view.y if K else np.zeros(0, np.int64)),
                   view.y if balance else None)


def grow(data: TrainingData | None, provenance: Provenance, settings: Settings,
         tree_ids: range) -> tuple[list[Tree], NDArray[np.uint8]]:
    """Grow the trees with the given spawn indices, in batches sized by the number of cases."""
    _check_can_grow(data, provenance)
    check_memory(len(tree_ids), data.rows)
    batch = max(1, min(MAX_BATCH, BATCH_ITEMS // data.rows))
    return grow_trees(data, provenance.rules, provenance.seed, tree_ids, batch, workers=settings.workers,
                      executor=settings.executor, progress=settings.progress)


def regrow(data: TrainingData | None, provenance: Provenance, b: int) -> Tree:
    """Tree ``b`` grown again, alone, from its own seed."""
    _check_can_grow(data, provenance)
    return grow_batch(data, provenance.rules, [tree_seed(provenance.seed, b)])[0][0]


def _check_can_grow(data: TrainingData | None, provenance: Provenance) -> None:
    blocker = growth_blocker(provenance.rules)
    if blocker is not None or data is None:
        raise RuntimeError(blocker or MSG_NO_DATA)


def more_of_the_same(view: FittedForest, provenance: Provenance, X: Any, y: Any) -> None:
    """Raise unless ``X`` and ``y`` are the data the forest was fit on (``add_trees``): the same fingerprint
    once coded as in fit, and the same class labels."""
    coded = view.coded(X)
    target = check_y(y, coded.shape[0], view.task)
    if view.X is None:
        raise RuntimeError(MSG_NO_DATA)
    same_labels = view.classes is None or np.array_equal(target.classes, view.classes)
    check_same_data(provenance.fingerprint if same_labels else "", view.X.shape, coded, target.values,
                    view.case_weights)
