"""Shared test configuration: hypothesis profiles and floating-point strictness.

Hypothesis runs a deterministic profile by default, so every run of the suite draws
the same examples and a failure reproduces exactly. Set the environment variable
``FORESTLAB_HYPOTHESIS=thorough`` for a longer, randomised search.
"""

from __future__ import annotations

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, settings

PROFILE_VARIABLE = "FORESTLAB_HYPOTHESIS"

settings.register_profile(
    "forestlab-deterministic",
    derandomize=True,
    database=None,
    deadline=None,
    max_examples=60,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.register_profile(
    "thorough",
    derandomize=False,
    database=None,
    deadline=None,
    max_examples=1000,
    print_blob=True,
    suppress_health_check=[HealthCheck.too_slow],
)

_PROFILES = {"": "forestlab-deterministic", "thorough": "thorough"}
_requested = os.environ.get(PROFILE_VARIABLE, "")
if _requested not in _PROFILES:
    raise pytest.UsageError(
        f"`{PROFILE_VARIABLE}` must be unset or 'thorough', got {_requested!r}."
    )
settings.load_profile(_PROFILES[_requested])


@pytest.fixture(autouse=True)
def _floating_point_errors_raise():
    """Run every test with NumPy floating-point warnings turned into errors.

    Overflow, invalid operations, division by zero and underflow all raise
    `FloatingPointError`, so silent NaN/inf trouble fails the test. Code that
    expects a benign underflow must say so locally with ``np.errstate(under=...)``.
    """
    with np.errstate(all="raise"):
        yield
