"""turnkit: size battery-backed multi-turn geared actuators.

The numeric core (gear trains, angle sensor, quarter-turn counter, power and
battery) imports only numpy at import time. Symbolic equations (sympy) and the
notebook front end (ipywidgets, bokeh) load only when used.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import DesignFileError, DesignValueError, TurnkitError, TurnkitWarning

__all__ = [
    "__version__",
    "TurnkitError",
    "DesignValueError",
    "DesignFileError",
    "TurnkitWarning",
]
