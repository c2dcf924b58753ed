"""Warning classes raised by forestlab.

All of them derive from :class:`ForestlabWarning`, so a user can silence or escalate the whole family with one
``warnings.filterwarnings`` call.
"""

from __future__ import annotations

__all__ = ["ForestlabWarning", "IncompleteForestWarning", "OverlapWarning", "SingleClassWarning"]


class ForestlabWarning(UserWarning):
    """Base class of every warning forestlab emits."""


class SingleClassWarning(ForestlabWarning):
    """The training labels contain a single class: every tree is one leaf that predicts it."""


class OverlapWarning(ForestlabWarning):
    """Some pairs of cases are never out-of-bag in the same tree, so their OOB proximity is undefined (NaN)."""


class IncompleteForestWarning(ForestlabWarning):
    """A loaded forest names a custom sampler or splitter that was not supplied: it predicts but cannot grow."""
