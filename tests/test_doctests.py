"""Run the doctests of derive's modules (public functions carry examples)."""
from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import derive

MODULES = sorted(m.name for m in pkgutil.iter_modules(derive.__path__) if m.name != "__main__")


@pytest.mark.parametrize("name", MODULES)
def test_module_doctests(name):
    mod = importlib.import_module(f"derive.{name}")
    result = doctest.testmod(mod, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0, f"{result.failed} doctest(s) failed in derive.{name}"
