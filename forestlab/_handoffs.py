"""The analyses, the export and the report as Forest methods: one line each, handing them the fitted forest's
view (or its stored form); each is documented where it is implemented."""

from __future__ import annotations

from ._members import hand_off
from .analyses import attributions as _attributions
from .analyses import dependence as _dependence
from .analyses import doubt as _doubt
from .analyses import importance as _importance
from .analyses import interaction as _interaction
from .analyses import proximity as _proximity
from .analyses.uncertainty import intervals as _intervals
from .analyses.uncertainty import quantile as _quantile
from .analyses.uncertainty import sets as _sets
from .analyses.uncertainty import variance as _variance
from .export import onnx_model as _onnx
from .report import write as _report

__all__ = ["HandOffs"]


class HandOffs:
    """What a fitted Forest hands on: each attribute is ``hand_off(analysis)`` (see :func:`._members.hand_off`)."""

    # which predictors matter, how the response depends on them, which cases are alike
    importance = hand_off(_importance.importance)
    partial_dependence = hand_off(_dependence.partial_dependence)
    proximity = hand_off(_proximity.proximity)
    outlyingness = hand_off(_proximity.outlyingness)
    proximity_map = hand_off(_proximity.proximity_map)
    # why one case came out as it did, which predictors act together, what speaks for a doubtful label
    attributions = hand_off(_attributions.attributions)
    interaction = hand_off(_interaction.interaction)
    doubt_reasons = hand_off(_doubt.doubt_reasons)
    # how sure each prediction is
    variance = hand_off(_variance.variance)
    intervals = hand_off(_intervals.intervals, with_oob=True)
    quantiles = hand_off(_quantile.quantiles)
    prediction_sets = hand_off(_sets.prediction_sets, with_oob=True)
    # the forest elsewhere
    to_onnx = hand_off(_onnx.to_onnx, of="_stored")
    report = hand_off(_report.report, of="_stored")
