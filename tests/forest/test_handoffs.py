"""The analyses handed off by Forest read as methods: their signature starts after the view, and their
documentation is the analysis's own."""

from __future__ import annotations

import inspect

import pytest

import forestlab as fl
from forestlab._handoffs import HandOffs

NAMES = sorted(name for name in vars(HandOffs) if not name.startswith("_"))


def test_every_hand_off_is_listed():
    assert {"importance", "attributions", "variance", "intervals", "prediction_sets", "to_onnx", "report"} <= \
        set(NAMES)


@pytest.mark.parametrize("name", NAMES)
def test_signature_and_docs_are_the_analysis(name):
    method = getattr(fl.Forest(), name)
    analysis = getattr(HandOffs, name).__wrapped__
    shown = list(inspect.signature(method).parameters)
    own = list(inspect.signature(analysis).parameters)
    assert shown == [p for p in own[1:] if p != "oob" or name not in ("intervals", "prediction_sets")]
    assert list(inspect.signature(getattr(fl.Forest, name)).parameters)[0] == "self"   # help(Forest.name)
    assert method.__doc__ == analysis.__doc__ and f"forest.{name}(" in method.__doc__


def test_an_unfitted_forest_says_so():
    with pytest.raises(RuntimeError, match=r"not fitted yet; call `fit\(X, y\)` first"):
        fl.Forest().attributions([[0.0]])
