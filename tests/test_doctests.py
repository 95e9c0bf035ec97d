"""Every docstring example in the installed ``levelwise`` package runs and prints what it shows."""

import doctest
import importlib
import pkgutil

import pytest


def _modules():
    # levelwise.widgets and levelwise.dashboards live in their own folders, outside levelwise.__path__.
    names = set()
    for package in ("levelwise", "levelwise.widgets", "levelwise.dashboards"):
        module = importlib.import_module(package)
        names.add(package)
        names.update(info.name for info in pkgutil.walk_packages(module.__path__, package + "."))
    return sorted(names)


MODULES = _modules()


def test_the_walk_sees_every_subpackage():
    # Guards the parametrisation below: a broken walk would silently test nothing.
    assert {"levelwise.model._fit", "levelwise.widgets.shared_model", "levelwise.dashboards.hardening"} <= set(MODULES)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE, verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} docstring examples failed in {name}"
