"""What a model file holds: a fitted forest's view, its settings and provenance, its out-of-bag results.

:class:`StoredForest` is what :func:`.write.write_forest` takes and :func:`.read.read_forest` gives back; the
front door turns it into a ``Forest``. A custom sampler or splitter that a file names but cannot rebuild is
kept as a :class:`StoredComponent`.
"""

from __future__ import annotations

import dataclasses
from typing import Any

from ..analyses.results import OutOfBag
from ..analyses.view import FittedForest
from ..engine.grow import GrowthRules
from ..engine.sampler import AllFeatures, CandidateSampler, RandomSubset, TreeSubspace
from ..engine.splitter import CartSplitter, EntropySplitter, GiniSplitter, SquaredErrorSplitter
from ..intake.settings import Provenance, Settings

__all__ = ["BASES", "BUILTIN", "StoredComponent", "StoredForest", "growth_blocker"]

BUILTIN = {"sampler": {c.__name__: c for c in (AllFeatures, RandomSubset, TreeSubspace)},
           "splitter": {c.__name__: c for c in (EntropySplitter, GiniSplitter, SquaredErrorSplitter)}}
BASES = {"sampler": CandidateSampler, "splitter": CartSplitter}


@dataclasses.dataclass(frozen=True)
class StoredComponent:
    """A custom sampler or splitter named in a model file that the file alone cannot rebuild.

    A forest loaded with one still predicts; to grow trees again, pass an instance of the class to
    :func:`forestlab.load` with ``components=[...]``.

    Attributes
    ----------
    kind : {"sampler", "splitter"}
    name : str
        Class name as saved.
    module : str
        Module the class was defined in.
    attributes : dict
        Its public attributes as saved (values that JSON cannot hold are stored as their ``repr``).
    """

    kind: str
    name: str
    module: str
    attributes: dict


@dataclasses.dataclass(frozen=True, eq=False)
class StoredForest:
    """Everything a model file holds about one fitted forest.

    Attributes
    ----------
    view : FittedForest
        Trees, in-bag counts, classes, coding of the predictors, training data when kept.
    settings : Settings
        The settings, resolved where the fit resolved them (sampler and splitter as grown).
    provenance : Provenance
        Growth rules, root seed, data fingerprint, class weights.
    oob : OutOfBag or None
        The out-of-bag results, when they could be computed.
    """

    view: FittedForest
    settings: Settings
    provenance: Provenance
    oob: OutOfBag | None = None


def growth_blocker(rules: GrowthRules | None) -> str | None:
    """Why trees grown with ``rules`` cannot be grown again (a message), or None when they can."""
    for part in (getattr(rules, "sampler", None), getattr(rules, "splitter", None)):
        if isinstance(part, StoredComponent):
            return (f"this forest was loaded with the custom {part.kind} {part.name!r} (module {part.module!r}) "
                    f"unrestored; pass an instance to `forestlab.load(path, components=[...])` to grow trees")
    return None


def is_component(value: Any) -> bool:
    """A sampler or splitter the engine can use (not a stored placeholder)."""
    return isinstance(value, (CandidateSampler, CartSplitter))
