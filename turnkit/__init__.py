"""turnkit: size battery-backed multi-turn geared actuators.

The numeric core (gear trains, angle sensor, quarter-turn counter, power and
battery) imports only numpy at import time. Symbolic equations (sympy), units
(pint) and the notebook front end (ipywidgets, bokeh) load only when used.

The most used entry points are available from the package itself and load on
first use::

    import turnkit
    design = turnkit.load_design("demo/irrigation-gate-valve.toml")
    result = turnkit.size(design, base_dir="demo")
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import DesignFileError, DesignValueError, TurnkitError, TurnkitWarning

# name -> (module, attribute); resolved lazily so that `import turnkit` stays light.
_LAZY = {
    "size": ("sizing", "size"),
    "load_design": ("designfile", "load_design"),
    "loads_design": ("designfile", "loads_design"),
    "save_design": ("designfile", "save_design"),
    "write_summary": ("export", "write_summary"),
    "GearTrain": ("gears", "GearTrain"),
    "ActuatorDesign": ("design", "ActuatorDesign"),
    "SizingResult": ("result", "SizingResult"),
    "tunables_for": ("tuning", "tunables_for"),
}

__all__ = [
    "__version__",
    "TurnkitError",
    "DesignValueError",
    "DesignFileError",
    "TurnkitWarning",
    *_LAZY,
]


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        module, attribute = _LAZY[name]
        value = getattr(importlib.import_module(f".{module}", __name__), attribute)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'turnkit' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
