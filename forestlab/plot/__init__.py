"""Pictures of a fitted forest's analyses (needs the optional extra: ``pip install 'forestlab[plot]'``).

Every function draws on ``ax`` (a new figure when None) and returns the matplotlib Axes, so pictures can be
combined, restyled and saved by the caller. Nothing here is imported by ``import forestlab``.

=====================  ==============================================================================
function               draws
=====================  ==============================================================================
`error_curve`          OOB error as trees are added, total and per class
`margins`              histogram of OOB margins with the doubtful cases marked
`importance`           importance bars with the spread over trees
`partial_dependence`   partial dependence curve (with ICE curves) or a two-feature surface
`proximity_map`        the cases on the proximity map, coloured by class, outliers ringed
`intervals`            prediction intervals along one feature or against the prediction
`coverage`             observed against nominal coverage of intervals or prediction sets
`case_ledger`          one case's attributions as bars from zero, from the baseline to its answer
`attribution_cloud`    every case's attribution of one feature against its value, coloured by another
`interaction_grid`     pairwise H-statistics as a numbered lower-triangle grid
=====================  ==============================================================================
"""

from __future__ import annotations

try:
    import matplotlib  # noqa: F401
except ImportError:  # pragma: no cover - exercised only without the extra
    raise ImportError("forestlab.plot needs matplotlib; install it with: pip install 'forestlab[plot]'") from None

from ._analyses import error_curve as error_curve
from ._analyses import importance as importance
from ._analyses import margins as margins
from ._analyses import partial_dependence as partial_dependence
from ._analyses import proximity_map as proximity_map
from ._reasons import attribution_cloud as attribution_cloud
from ._reasons import case_ledger as case_ledger
from ._reasons import interaction_grid as interaction_grid
from ._uncertainty import coverage as coverage
from ._uncertainty import intervals as intervals

__all__ = ["attribution_cloud", "case_ledger", "coverage", "error_curve", "importance", "interaction_grid",
           "intervals", "margins", "partial_dependence", "proximity_map"]
