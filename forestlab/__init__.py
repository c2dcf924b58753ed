"""forestlab: bagged decision trees and random forests in pure NumPy, with out-of-bag analytics."""

from ._crossval import cross_validated_error as cross_validated_error
from ._dependence import Dependence as Dependence
from ._forest import Forest as Forest
from ._importance import Importance as Importance
from ._modelcheck import ModelFileError as ModelFileError
from ._parallel import TreeGrowthError as TreeGrowthError
from ._persist import StoredComponent as StoredComponent
from ._persist import load as load
from ._proximity import ProximityMap as ProximityMap
from ._proximity import classical_scaling as classical_scaling
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
from ._warnings import IncompleteForestWarning as IncompleteForestWarning
from ._warnings import NeverOutOfBagWarning as NeverOutOfBagWarning
from ._warnings import OverlapWarning as OverlapWarning
from ._warnings import SingleClassWarning as SingleClassWarning

__version__ = "0.1.0"

__all__ = [
    "AllFeatures",
    "CandidateSampler",
    "CartSplitter",
    "CrossValidatedError",
    "Dependence",
    "DoubtfulCases",
    "EntropySplitter",
    "Forest",
    "ForestlabWarning",
    "GiniSplitter",
    "Importance",
    "IncompleteForestWarning",
    "ModelFileError",
    "NeverOutOfBagWarning",
    "OutOfBag",
    "OverlapWarning",
    "ProximityMap",
    "RandomSubset",
    "SingleClassWarning",
    "SquaredErrorSplitter",
    "StoredComponent",
    "Tree",
    "TreeGrowthError",
    "TreeSubspace",
    "classical_scaling",
    "cross_validated_error",
    "load",
]
