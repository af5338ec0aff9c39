"""Run the examples in every library module's docstrings (they document real behaviour)."""

import doctest
import importlib
import pkgutil

import pytest

import vesselnet

MODULES = sorted(m.name for m in pkgutil.walk_packages(vesselnet.__path__, "vesselnet.")
                 if not m.name.endswith("__main__"))


@pytest.mark.parametrize("name", MODULES)
def test_module_examples(name):
    module = importlib.import_module(name)
    failures, _ = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert failures == 0
