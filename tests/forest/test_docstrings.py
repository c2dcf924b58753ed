"""Every runnable example in the package's docstrings runs and prints what it shows."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import forestlab

MODULES = sorted(info.name for info in pkgutil.walk_packages(forestlab.__path__, prefix="forestlab."))


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0


def test_docstring_examples_exist():
    attempted = sum(doctest.testmod(importlib.import_module(m)).attempted for m in MODULES)
    assert attempted >= 25
