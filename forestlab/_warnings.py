"""Warning classes raised by forestlab.

All of them derive from :class:`ForestlabWarning`, so a user can silence or escalate the whole family with one
``warnings.filterwarnings`` call.
"""

from __future__ import annotations

__all__ = ["CandidatesCappedWarning", "ForestlabWarning", "IncompleteForestWarning", "NeverOutOfBagWarning",
           "OverlapWarning", "SingleClassWarning"]


class ForestlabWarning(UserWarning):
    """Base class of every warning forestlab emits."""


class SingleClassWarning(ForestlabWarning):
    """The training labels contain a single class: every tree is one leaf that predicts it."""


class OverlapWarning(ForestlabWarning):
    """Some pairs of cases are never out-of-bag in the same tree, so their OOB proximity is undefined (NaN)."""


class NeverOutOfBagWarning(ForestlabWarning):
    """Some training case was in every tree's bootstrap sample, so no out-of-bag result exists for it.

    The case gets NaN (or no label) and is left out of the out-of-bag error; more trees usually cover it.
    """


class IncompleteForestWarning(ForestlabWarning):
    """A loaded forest names a custom sampler or splitter that was not supplied: it predicts but cannot grow."""


class CandidatesCappedWarning(ForestlabWarning):
    """A sampler was asked for more candidate features than the data have: every feature is a candidate."""
