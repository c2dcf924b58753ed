"""Standard synthetic benchmark problems for tree ensembles.

Generators of the classification and regression problems used throughout the
bagging and random-forest literature, written in NumPy from the published formulas:

===========  ==========  ======  ===================================================
generator    task        inputs  source
===========  ==========  ======  ===================================================
`twonorm`    2 classes   20      Breiman (1996, tech. report 460)
`threenorm`  2 classes   20      Breiman (1996, tech. report 460)
`ringnorm`   2 classes   20      Breiman (1996, tech. report 460)
`waveform`   3 classes   21      Breiman, Friedman, Olshen & Stone (1984), pp. 43-55
`friedman1`  regression  10      Friedman (1991), Ann. Statist. 19:1-67
`friedman2`  regression  4       Friedman (1991), Ann. Statist. 19:1-67
`friedman3`  regression  4       Friedman (1991), Ann. Statist. 19:1-67
===========  ==========  ======  ===================================================

Every generator returns ``(X, y)``: ``X`` is a float64 array of shape ``(n, d)``;
``y`` holds int64 class labels ``0 .. K-1`` for classification and float64
responses for regression. Class labels are drawn independently and uniformly for
every case, so class sizes are binomial (multinomial), not exactly balanced.
Randomness comes only from ``rng`` (``None``, an int, a `numpy.random.SeedSequence`
or a `numpy.random.Generator`, normalised with `numpy.random.default_rng`), so a
fixed seed gives the same sample on every call.

The Bayes error constants below hold for the default dimensions.
"""

from ._classification import RINGNORM_BAYES_ERROR as RINGNORM_BAYES_ERROR
from ._classification import THREENORM_BAYES_ERROR as THREENORM_BAYES_ERROR
from ._classification import TWONORM_BAYES_ERROR as TWONORM_BAYES_ERROR
from ._classification import WAVEFORM_BAYES_ERROR as WAVEFORM_BAYES_ERROR
from ._classification import ringnorm as ringnorm
from ._classification import threenorm as threenorm
from ._classification import twonorm as twonorm
from ._classification import waveform as waveform
from ._regression import friedman1 as friedman1
from ._regression import friedman2 as friedman2
from ._regression import friedman3 as friedman3

__all__ = [
    "RINGNORM_BAYES_ERROR",
    "THREENORM_BAYES_ERROR",
    "TWONORM_BAYES_ERROR",
    "WAVEFORM_BAYES_ERROR",
    "friedman1",
    "friedman2",
    "friedman3",
    "ringnorm",
    "threenorm",
    "twonorm",
    "waveform",
]
