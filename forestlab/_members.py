"""How the Forest's members are made: settings and fitted attributes as properties, the analyses as
one-line hand-offs of the fitted view, and the plain ``Forest(...)`` repr."""

from __future__ import annotations

import functools
import inspect
from collections.abc import Callable
from typing import Any, Concatenate, ParamSpec, TypeVar

from .analyses.cases import vote_shares
from .analyses.view import FittedForest
from .intake.settings import Settings

__all__ = ["DEFAULTS", "fitted_attribute", "hand_off", "setting", "settings_repr", "vote_shares"]

P = ParamSpec("P")
R = TypeVar("R")

# the constructor's defaults, in its order (``settings_repr`` shows what differs)
DEFAULTS = {"trees": 500, "sampler": None, "splitter": None, "min_leaf": None, "depth_limit": None,
            "sample_size": None, "replace": True, "rng": None, "task": None, "workers": 1, "categorical": None,
            "balance": None, "class_priors": None, "executor": None, "progress": None}


def hand_off(analysis: Callable[Concatenate[FittedForest, P], R], of: str = "_fitted_view", *,
             with_oob: bool = False) -> Callable[Concatenate[Any, P], R]:
    """A Forest method that gives ``analysis`` the fitted forest's view (or what the Forest method ``of``
    returns, e.g. ``"_stored"``: view, settings, provenance and OOB results) and, ``with_oob``, its out-of-bag
    results as ``oob=`` (computed once and cached, or read from the model file); the docstring is the
    analysis's."""
    @functools.wraps(analysis)
    def method(self: Any, *args: P.args, **kwargs: P.kwargs) -> R:
        if with_oob:
            return analysis(getattr(self, of)(), *args, oob=self.oob, **kwargs)
        return analysis(getattr(self, of)(), *args, **kwargs)
    shown = inspect.signature(analysis)  # as a method: ``self`` for the view, ``oob`` supplied by the Forest
    rest = [p for p in list(shown.parameters.values())[1:] if not (with_oob and p.name == "oob")]
    method.__signature__ = shown.replace(parameters=[inspect.Parameter("self", inspect.Parameter.POSITIONAL_ONLY),
                                                     *rest])
    return method


def fitted_attribute(name: str, doc: str) -> property:
    """A read-only attribute of the fitted forest (an AttributeError before fit)."""
    def get(self: Any) -> Any:
        part = self._grown if name == "seed" else self._view
        if part is None:
            raise AttributeError(f"`{name}` is set by `fit`; this Forest is not fitted yet")
        return getattr(part, name)
    return property(get, doc=doc)


def setting(name: str, doc: str, resolved: Callable[[Any], Any] | None = None) -> property:
    """A setting as given; after fit, ``resolved(forest)`` where the fit resolves it."""
    def get(self: Any) -> Any:
        return resolved(self) if resolved is not None and self.fitted else getattr(self._settings, name)
    return property(get, doc=doc)


def settings_repr(settings: Settings, rng: Any) -> str:
    """``Forest(...)`` with the arguments that differ from their defaults."""
    given = {k: rng if k == "rng" else getattr(settings, k) for k in DEFAULTS}
    if repr(given["sampler"]) == "RandomSubset(None)":
        given["sampler"] = None
    shown = [f"{k}={v!r}" for k, v in given.items() if v is not DEFAULTS[k] and v != DEFAULTS[k]]
    return f"Forest({', '.join(shown)})"
