"""forestlab: bagged decision trees and random forests in pure NumPy, with out-of-bag analytics."""

from ._crossval import cross_validated_error as cross_validated_error
from ._forest import Forest as Forest
from ._load import load as load
from ._version import __version__ as __version__
from ._warnings import CandidatesCappedWarning as CandidatesCappedWarning
from ._warnings import FewTreesWarning as FewTreesWarning
from ._warnings import ForestlabWarning as ForestlabWarning
from ._warnings import IncompleteForestWarning as IncompleteForestWarning
from ._warnings import NeverOutOfBagWarning as NeverOutOfBagWarning
from ._warnings import OverlapWarning as OverlapWarning
from ._warnings import SingleClassWarning as SingleClassWarning
from ._warnings import SmallTrustedSetWarning as SmallTrustedSetWarning
from .analyses.accounts import CaseAccount as CaseAccount
from .analyses.accounts import CaseAttributions as CaseAttributions
from .analyses.accounts import OverallWeight as OverallWeight
from .analyses.dependence import Dependence as Dependence
from .analyses.doubt import DoubtReasons as DoubtReasons
from .analyses.importance import Importance as Importance
from .analyses.interaction import InteractionStrength as InteractionStrength
from .analyses.proximity import ProximityMap as ProximityMap
from .analyses.proximity import classical_scaling as classical_scaling
from .analyses.results import CrossValidatedError as CrossValidatedError
from .analyses.results import DoubtfulCases as DoubtfulCases
from .analyses.results import OutOfBag as OutOfBag
from .analyses.uncertainty.intervals import PredictionIntervals as PredictionIntervals
from .analyses.uncertainty.quantile import ConditionalQuantiles as ConditionalQuantiles
from .analyses.uncertainty.sets import PredictionSets as PredictionSets
from .analyses.uncertainty.variance import SamplingVariance as SamplingVariance
from .engine.sampler import AllFeatures as AllFeatures
from .engine.sampler import CandidateSampler as CandidateSampler
from .engine.sampler import RandomSubset as RandomSubset
from .engine.sampler import TreeSubspace as TreeSubspace
from .engine.splitter import CartSplitter as CartSplitter
from .engine.splitter import EntropySplitter as EntropySplitter
from .engine.splitter import GiniSplitter as GiniSplitter
from .engine.splitter import SquaredErrorSplitter as SquaredErrorSplitter
from .engine.tree import Tree as Tree
from .execution.parallel import TreeGrowthError as TreeGrowthError
from .modelfile.check import ModelFileError as ModelFileError
from .modelfile.stored import StoredComponent as StoredComponent

__all__ = [
    "AllFeatures",
    "CandidatesCappedWarning",
    "CandidateSampler",
    "CartSplitter",
    "CaseAccount",
    "CaseAttributions",
    "ConditionalQuantiles",
    "CrossValidatedError",
    "Dependence",
    "DoubtReasons",
    "DoubtfulCases",
    "EntropySplitter",
    "FewTreesWarning",
    "Forest",
    "ForestlabWarning",
    "GiniSplitter",
    "Importance",
    "IncompleteForestWarning",
    "InteractionStrength",
    "ModelFileError",
    "NeverOutOfBagWarning",
    "OutOfBag",
    "OverallWeight",
    "OverlapWarning",
    "PredictionIntervals",
    "PredictionSets",
    "ProximityMap",
    "RandomSubset",
    "SamplingVariance",
    "SingleClassWarning",
    "SmallTrustedSetWarning",
    "SquaredErrorSplitter",
    "StoredComponent",
    "Tree",
    "TreeGrowthError",
    "TreeSubspace",
    "classical_scaling",
    "cross_validated_error",
    "load",
]
