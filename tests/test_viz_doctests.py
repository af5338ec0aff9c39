"""The examples in the view layer's docstrings run and print what they say."""

from __future__ import annotations

import doctest
import importlib

import pytest

MODULES = ["viz.bins", "viz.charts", "viz.layout", "viz.markup", "viz.network", "viz.page",
           "viz.palette", "viz.quantities", "viz.report"]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    result = doctest.testmod(importlib.import_module(name), optionflags=doctest.ELLIPSIS)
    assert result.attempted > 0 and result.failed == 0
