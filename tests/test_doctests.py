"""Run the doctests of derive's modules: only modules that hold examples are collected."""
from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import derive

FLAGS = doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE


def _with_examples() -> list:
    names = []
    every = ["derive"] + [m.name for m in pkgutil.walk_packages(derive.__path__, "derive.")]
    for name in every:
        if name.endswith("__main__"):
            continue
        mod = importlib.import_module(name)
        if any(t.examples for t in doctest.DocTestFinder().find(mod)):
            names.append(name)
    return sorted(names)


MODULES = _with_examples()


def test_doctest_modules_found():
    # the public API and the parser carry examples; an empty list would test nothing
    assert "derive" in MODULES
    assert len(MODULES) >= 5


@pytest.mark.parametrize("name", MODULES)
def test_module_doctests(name):
    mod = importlib.import_module(name)
    result = doctest.testmod(mod, optionflags=FLAGS)
    assert result.attempted > 0 and result.failed == 0, f"{result.failed} doctest(s) failed in {name}"
