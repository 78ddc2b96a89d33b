"""Every public name of the core documents itself (numpydoc style, units stated)."""

from __future__ import annotations

import importlib
import inspect

import pytest

import turnkit

CORE = ["gears", "sensor", "latches", "angle_error", "calibration", "counter", "schedule", "motion",
        "simulation", "bounds", "power", "battery", "equations", "design", "designfile", "result",
        "sizing", "tuning", "export", "svgplot", "explore", "units", "errors"]


def _public(module):
    names = getattr(module, "__all__", None) or [n for n in vars(module) if not n.startswith("_")]
    for name in names:
        obj = getattr(module, name)
        if (inspect.isfunction(obj) or inspect.isclass(obj)) and obj.__module__ == module.__name__:
            yield name, obj


@pytest.mark.parametrize("name", CORE)
def test_public_functions_and_classes_have_docstrings(name):
    module = importlib.import_module(f"turnkit.{name}")
    assert module.__doc__ and module.__doc__.strip(), f"turnkit.{name} has no module docstring"
    missing = [n for n, obj in _public(module) if not (obj.__doc__ and obj.__doc__.strip())]
    assert not missing, f"turnkit.{name}: no docstring for {', '.join(missing)}"


def test_lazy_package_entry_points_resolve():
    for name in turnkit._LAZY:
        assert getattr(turnkit, name) is not None
    with pytest.raises(AttributeError):
        turnkit.no_such_name  # noqa: B018
