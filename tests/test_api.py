"""The public API contract (kinfit's API rule, DEVELOPERS.md): every module declares __all__, every name in it
exists, and the top-level names resolve.

These are checks of kinfit's own contract, not of the physics: no outside source applies."""

from __future__ import annotations

import importlib
import pkgutil

import pytest

import kinfit

MODULES = sorted(m.name for m in pkgutil.walk_packages(kinfit.__path__, "kinfit."))


@pytest.mark.parametrize("name", MODULES)
def test_module_all_names_exist(name):
    module = importlib.import_module(name)
    assert hasattr(module, "__all__"), f"{name} has no __all__"
    for item in module.__all__:
        assert hasattr(module, item), f"{name}.__all__ names '{item}', which does not exist"


def test_top_level_api_resolves():
    for item in kinfit.__all__:
        assert getattr(kinfit, item) is not None
