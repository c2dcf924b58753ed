"""forestlab: bagged decision trees and random forests in pure NumPy, with out-of-bag analytics."""

from ._crossval import cross_validated_error as cross_validated_error
from ._forest import Forest as Forest
from ._results import CrossValidatedError as CrossValidatedError
from ._results import DoubtfulCases as DoubtfulCases
from ._results import OutOfBag as OutOfBag
from ._sampler import AllFeatures as AllFeatures
from ._sampler import CandidateSampler as CandidateSampler
from ._sampler import RandomSubset as RandomSubset
from ._sampler import TreeSubspace as TreeSubspace
from ._splitter import CartSplitter as CartSplitter
from ._splitter import EntropySplitter as EntropySplitter
from ._splitter import GiniSplitter as GiniSplitter
from ._splitter import SquaredErrorSplitter as SquaredErrorSplitter
from ._tree import Tree as Tree
from ._warnings import ForestlabWarning as ForestlabWarning
from ._warnings import NeverOutOfBagWarning as NeverOutOfBagWarning
from ._warnings import SingleClassWarning as SingleClassWarning

__version__ = "0.1.0"

__all__ = [
    "AllFeatures",
    "CandidateSampler",
    "CartSplitter",
    "CrossValidatedError",
    "DoubtfulCases",
    "EntropySplitter",
    "Forest",
    "ForestlabWarning",
    "GiniSplitter",
    "NeverOutOfBagWarning",
    "OutOfBag",
    "RandomSubset",
    "SingleClassWarning",
    "SquaredErrorSplitter",
    "Tree",
    "TreeSubspace",
    "cross_validated_error",
]
