"""The notebook front end: a dashboard of sliders, live Bokeh plots and requirement checks.

This package is the only part of turnkit that imports ipywidgets, Bokeh and
jupyter_bokeh. It computes nothing itself: a control change builds a new
design through :mod:`turnkit.tuning`, sizes it with
:func:`turnkit.sizing.size` and pushes the result's arrays into the plots.

Importing ``turnkit.ui`` loads no widget or plotting package; they load when
:class:`Dashboard` is first used, and BokehJS is sent to the page only when a
dashboard is displayed.

Examples
--------
>>> from turnkit.ui import Dashboard            # doctest: +SKIP
>>> Dashboard("my-actuator.toml")               # doctest: +SKIP
"""

from __future__ import annotations

__all__ = ["Dashboard"]


def __getattr__(name: str):
    if name == "Dashboard":
        from .dashboard import Dashboard

        return Dashboard
    raise AttributeError(f"module 'turnkit.ui' has no attribute {name!r}")
