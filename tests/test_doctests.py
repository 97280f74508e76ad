"""Run the examples in every module's docstrings (rules, solvers, units, ...)."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import apsidal.compiler
import apsidal.lang
import pytest


def _modules():
    for package in (apsidal.lang, apsidal.compiler):
        for info in pkgutil.walk_packages(package.__path__, package.__name__ + "."):
            yield info.name


@pytest.mark.parametrize("name", sorted(_modules()))
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0, f"{result.failed} docstring example(s) failed in {name}"
