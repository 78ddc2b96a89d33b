"""The sizing dashboard: controls, live plots, readouts and requirement checks in one widget.

:class:`Dashboard` shows one actuator design. Each control is a
:class:`turnkit.tuning.Tunable`; moving it builds a new design with
``tunable.set(design, value)``, sizes it with :func:`turnkit.sizing.size`
and refreshes every view from the returned
:class:`~turnkit.result.SizingResult`: plot data are swapped inside the
existing Bokeh sources (:func:`turnkit.ui.plots.update`), readouts and the
requirement panel are rewritten. Nothing here computes physics.

Drags are coalesced: while a slider is being dragged in the browser, values
arriving within ``debounce_s`` of each other are applied once, with the
latest value. Values set from Python (``dash.controls["poll_period_ms"].value
= 20`` or :meth:`Dashboard.set`) are applied at once, so scripts and tests
see the new result on the next line.

Every part carries a stable CSS class (``tk-app``, ``tk-life``,
``tk-checks``, ``tk-control-<key>``, ``tk-plot-<curve>``) and readouts carry
an element id (``tk-life-value``), so a browser test can find one node.
"""

from __future__ import annotations

import asyncio
import html
import math
import re
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import ipywidgets as widgets
from jupyter_bokeh import BokehModel

from ..errors import TurnkitError
from ..result import Check, SizingResult, Value, micro_sign
from . import plots
from .plots import format_number

__all__ = ["Dashboard", "HEADER_CAUTION", "PLOT_ORDER", "READOUTS"]

#: Curve keys in the order the plots are laid out; other curves follow.
PLOT_ORDER: tuple[str, ...] = (
    "life_vs_poll_period",
    "current_vs_poll_period",
    "current_profile",
    "resolution_vs_reduction",
    "backdrive_speed_vs_reduction",
    "backdrive_event",
    "backdrive_error",
    "sensor_error",
)


@dataclass(frozen=True, slots=True)
class Readout:
    """A headline number: CSS name, short label, and the value keys that may carry it (first found wins)."""

    name: str
    label: str
    keys: tuple[str, ...]


#: The headline readouts above the plots. ``name`` gives the CSS class
#: ``tk-<name>`` and the element id ``tk-<name>-value``.
READOUTS: tuple[Readout, ...] = (
    Readout("ratio", "reduction", ("ratio_float",)),
    Readout("resolution", "output resolution", ("output_resolution",)),
    Readout("backdrive-speed", "motor speed, back-driven", ("backdrive_motor_speed_rpm",)),
    Readout("trackable", "counted by the model up to (no margin)", ("trackable_motor_speed_rpm",)),
    Readout("max-period", "longest poll period with the margin", ("max_poll_period_ms",)),
    Readout("counting-margin", "back-drive counted with margin", ("backdrive_counting_margin_percent",)),
    Readout("duty", "duty cycle", ("duty_cycle_percent",)),
    Readout("current", "average current", ("average_current_uA",)),
    Readout("life", "battery life", ("service_life_years", "battery_life_years")),
)

#: The one-line caution under the dashboard's title (the full cautions are in the requirement panel).
HEADER_CAUTION = (
    "⚠ Design estimates, not a safety case: powered actuators pinch and crush, and a lost count moves "
    "them to the wrong place. Follow local codes, functional-safety standards and licensed practice."
)

#: Width of one step of a logarithmic slider, in decades (about 1.2 %).
LOG_STEP_DECADES = 0.005

_CSS = """
<style>
.tk-app { font-family: 'Source Sans 3', 'Segoe UI', 'Helvetica Neue', Arial, sans-serif; color: #1f2a33; }
.tk-app .tk-header { display: flex; align-items: baseline; gap: 14px; margin: 2px 0 6px 0; }
.tk-app .tk-title { font-size: 18px; font-weight: 600; }
.tk-app .tk-header-caution { font-size: 12.5px; color: #6b2d00; margin: 0 0 6px 0; }
.tk-app .tk-badge { border-radius: 4px; padding: 1px 8px; font-size: 12px; font-weight: 700;
  letter-spacing: .04em; border: 1.5px solid; }
.tk-app .tk-badge.tk-pass { color: #005a8c; border-color: #0072B2; background: #eaf4fa; }
.tk-app .tk-badge.tk-fail { color: #8a3600; border-color: #D55E00; background: #fdf0e8; }
.tk-app .tk-card { border: 1px solid #d5dde3; border-radius: 6px; padding: 4px 10px; min-width: 104px;
  background: #fbfcfd; }
.tk-app .tk-card-label { font-size: 11px; color: #4a5864; text-transform: lowercase; }
.tk-app .tk-card-value { font-size: 17px; font-weight: 600; font-variant-numeric: tabular-nums; }
.tk-app .tk-plots, .tk-app .tk-readouts, .tk-app .tk-body { gap: 8px; }
/* Side panel: readouts and controls stay in view while the plots scroll past. Sticky needs every
   box between it and the notebook's scroller to let it overflow, JupyterLab's output area included. */
.jp-OutputArea-output:has(.tk-app), .jp-OutputArea-child:has(.tk-app), .jp-Cell-outputArea:has(.tk-app),
.tk-app, .tk-app .tk-body { overflow: visible !important; }
.tk-app .tk-side { position: sticky; top: 0; z-index: 3; align-self: flex-start; background: #ffffff;
  max-height: calc(100vh - 130px); display: flex; flex-direction: column; gap: 6px; }
.tk-app .tk-side .tk-readouts, .tk-app .tk-side .tk-actions { flex: 0 0 auto; gap: 4px; }
.tk-app .tk-actions .widget-html, .tk-app .tk-actions .widget-html-content { height: auto; min-height: 0;
  line-height: 1.3; }
.tk-app .tk-side .tk-card .widget-html-content, .tk-app .tk-side .tk-card div { line-height: 1.3; }
.tk-app .tk-side .tk-card-label { white-space: nowrap; overflow: hidden; text-overflow: ellipsis; }
.tk-app .tk-side .tk-card { min-width: 0; flex: 1 1 150px; padding: 2px 8px; margin: 0; }
.tk-app .tk-side .tk-card .widget-html-content { min-width: 0; }
.tk-app .tk-side .tk-card-value { font-size: 15px; white-space: nowrap; }
.tk-app .tk-side .tk-controls { flex: 1 1 auto; min-height: 120px; overflow-y: auto !important;
  overflow-x: hidden !important; }
.tk-app .tk-controls { border-right: 1px solid #e3e8ec; padding-right: 8px; }
.tk-app .tk-control-label { font-size: 12.5px; color: #33414d; margin: 2px 0 0 2px; line-height: 1.2; }
.tk-app .tk-controls .widget-html { margin-bottom: 0; }
.tk-app .tk-section-title { font-size: 12px; font-weight: 700; color: #4a5864; margin-top: 6px;
  text-transform: uppercase; letter-spacing: .06em; }
.tk-app table.tk-table { border-collapse: collapse; font-size: 12.5px; width: 100%; }
.tk-app table.tk-table th { text-align: left; font-weight: 600; border-bottom: 1.5px solid #9aa8b3;
  padding: 3px 6px; }
.tk-app table.tk-table td { border-bottom: 1px solid #e3e8ec; padding: 3px 6px; vertical-align: top;
  font-variant-numeric: tabular-nums; }
.tk-app table.tk-table td.tk-num { white-space: nowrap; }
.tk-app tr.tk-fail td { background: #fdf0e8; }
.tk-app .tk-verdict { font-weight: 700; }
.tk-app tr.tk-pass .tk-verdict { color: #005a8c; }
.tk-app tr.tk-fail .tk-verdict { color: #8a3600; }
.tk-app .tk-advice { color: #4a5864; font-size: 12px; }
.tk-app ul.tk-notes { margin: 2px 0 4px 18px; padding: 0; font-size: 12.5px; }
.tk-app .tk-caution li { color: #6b2d00; }
.tk-app .tk-message-error { color: #8a3600; font-size: 12.5px; }
.tk-app .tk-message-ok { color: #33414d; font-size: 12.5px; }
.tk-app .tk-files code { font-size: 12px; }
</style>
"""


def _css_name(key: str) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "-", key).strip("-").lower()


def _from_browser(widget) -> bool:
    # ipywidgets holds ``_property_lock`` while it applies a state message from
    # the front end; a value set from Python arrives with the lock empty.
    return bool(getattr(widget, "_property_lock", None))


def _percent(margin: float) -> str:
    if not math.isfinite(margin):
        return "unlimited" if margin > 0 else "-unlimited"
    return f"{margin * 100:+.1f} %"


class Dashboard:
    """An interactive sizing dashboard for one actuator design.

    Parameters
    ----------
    design : str, pathlib.Path or ActuatorDesign
        A design file (TOML) to load, or a design object. Only a dashboard
        opened from a file can save the tuned design back.
    export_dir : str or pathlib.Path, optional
        Folder for the exported summary; default: the current directory (in
        Jupyter, the notebook's folder).
    debounce_s : float, optional
        Window in which values from a slider drag are coalesced, in s
        (default 0.12; 0 applies every value).
    size : callable, optional
        ``size(design) -> SizingResult``; default :func:`turnkit.sizing.size`,
        with recorded motion traces found next to the design file.
    tunables : sequence of Tunable, optional
        The controls; default ``turnkit.tuning.tunables_for(design)``. A
        tunable with ``choices`` becomes a drop-down list, an ``integer`` one
        a whole-number slider, a ``log`` one a logarithmic slider.
    load, save, export : callable, optional
        ``load(path) -> design``, ``save(design, path, overwrite=...)`` and
        ``export(result, path, overwrite=...)``; default
        :func:`turnkit.designfile.load_design`,
        :func:`turnkit.designfile.save_design` and
        :func:`turnkit.export.write_summary`.

    Attributes
    ----------
    design : ActuatorDesign
        The design as currently tuned.
    result : SizingResult
        Its sizing result.
    controls : dict of str to ipywidgets.Widget
        The control for each tunable key.
    labels : dict of str to ipywidgets.HTML
        The label above each control (tunable label with its unit).
    figures : dict of str to turnkit.ui.plots.FigureHandles
        The Bokeh figure and sources for each curve key.
    readouts : dict of str to ipywidgets.HTML
        The headline numbers, by :data:`READOUTS` name.
    requirements : ipywidgets.HTML
        The requirement panel.
    error : str
        Why the last change was rejected; empty when it was applied.
    last_update_s : float
        Time the last applied change took in Python, in s.
    widget : ipywidgets.VBox
        The whole dashboard, for embedding in another layout.
    """

    def __init__(
        self,
        design: Any,
        *,
        export_dir: str | Path | None = None,
        debounce_s: float = 0.12,
        size: Callable[[Any], SizingResult] | None = None,
        tunables: Sequence[Any] | None = None,
        load: Callable[[Any], Any] | None = None,
        save: Callable[..., Any] | None = None,
        export: Callable[..., Any] | None = None,
    ) -> None:
        if debounce_s < 0 or not math.isfinite(debounce_s):
            raise ValueError(f"debounce_s must be a finite number >= 0 s, not {debounce_s!r}")
        self.path: Path | None = None
        # What was read from the file (its fingerprint), so a save never reverts someone else's edit.
        self._loaded = None
        if isinstance(design, (str, Path)):
            self.path = Path(design)
            if load is None:
                from ..designfile import load_design_file

                self._loaded = load_design_file(self.path)
                design = self._loaded.design
            else:
                design = load(self.path)
        self._size = size if size is not None else _default_size(self.path)
        self._save = save
        self._export = export
        self.export_dir = Path(export_dir) if export_dir is not None else None
        self.debounce_s = float(debounce_s)
        self.tunables: tuple[Any, ...] = tuple(tunables) if tunables is not None else _default_tunables(design)
        self._saved_design = design
        self.design = design
        self.result: SizingResult = self._size(design)
        self.last_update_s: float = 0.0
        self.error: str = ""
        self._pending: dict[str, Any] = {}
        self._timer: asyncio.TimerHandle | None = None
        self._syncing = False
        self._build()

    # ------------------------------------------------------------------ building
    def _build(self) -> None:
        self.controls: dict[str, widgets.Widget] = {}
        self._by_key: dict[str, Any] = {}
        # A typed value is kept exactly (a slider's readout snaps it to the slider's grid).
        self.typed: dict[str, widgets.Text] = {}
        for t in self.tunables:
            self.controls[t.key] = self._make_choice(t) if getattr(t, "choices", ()) else self._make_slider(t)
            self._by_key[t.key] = t
            if not getattr(t, "choices", ()) and hasattr(t, "parse"):
                self.typed[t.key] = self._make_typed(t)

        self._header = widgets.HTML()
        self._header.add_class("tk-header-box")
        self.readouts: dict[str, widgets.HTML] = {}
        for r in READOUTS:
            box = widgets.HTML()
            box.add_class("tk-card")
            box.add_class(f"tk-{r.name}")
            self.readouts[r.name] = box

        self.figures: dict[str, plots.FigureHandles] = {}
        self.plot_widgets: dict[str, BokehModel] = {}
        for curve in self._ordered_curves(self.result):
            self._add_plot(curve)

        self.requirements = widgets.HTML()
        self.requirements.add_class("tk-requirements")
        self.values_table = widgets.HTML()
        self.values_table.add_class("tk-values")
        self._values_box = widgets.Accordion(children=[self.values_table])
        self._values_box.set_title(0, "All derived values")
        self._values_box.selected_index = None

        self.save_button = widgets.Button(description="Save design", icon="save",
                                          tooltip="Write the tuned design back to its TOML file")
        self.save_button.add_class("tk-save")
        if self.path is None:
            self.save_button.disabled = True
            self.save_button.tooltip = "Open the dashboard from a design file to save to it"
        self.export_button = widgets.Button(description="Export summary", icon="file-export",
                                            tooltip="Write the sizing summary as HTML, Markdown and JSON")
        self.export_button.add_class("tk-export")
        self.reset_button = widgets.Button(description="Reset", icon="undo",
                                           tooltip="Go back to the design as loaded or last saved")
        self.reset_button.add_class("tk-reset")
        self.save_button.on_click(lambda _b: self._click(self.save))
        self.export_button.on_click(lambda _b: self._click(self.export))
        self.reset_button.on_click(lambda _b: self._click(self.reset))
        self.files = widgets.HTML()
        self.files.add_class("tk-files")
        self.message = widgets.HTML()
        self.message.add_class("tk-message")

        control_rows: list[widgets.Widget] = [widgets.HTML("<div class='tk-section-title'>Controls</div>")]
        self.labels: dict[str, widgets.HTML] = {}
        for key, control in self.controls.items():
            # The label sits above its control: tunable labels are long and carry the unit.
            label = widgets.HTML(f"<div class='tk-control-label'>{html.escape(_label(self._by_key[key]))}</div>")
            self.labels[key] = label
            control_rows += [label, control] + ([self.typed[key]] if key in self.typed else [])
        # The buttons and their messages sit above the controls, so they stay in view with them.
        actions_box = widgets.VBox([
            widgets.HBox([self.save_button, self.export_button, self.reset_button],
                         layout=widgets.Layout(flex_flow="row wrap", margin="2px 0 0 0")),
            self.files,
            self.message,
        ])
        actions_box.add_class("tk-actions")
        controls_box = widgets.VBox(control_rows, layout=widgets.Layout(width="350px"))
        controls_box.add_class("tk-controls")
        plots_box = widgets.Box(
            list(self.plot_widgets.values()),
            layout=widgets.Layout(display="flex", flex_flow="row wrap", flex="1 1 440px"),
        )
        plots_box.add_class("tk-plots")
        readouts_box = widgets.HBox(list(self.readouts.values()),
                                    layout=widgets.Layout(flex_flow="row wrap"))
        readouts_box.add_class("tk-readouts")
        # The headline numbers and the controls share a side panel that stays in view while the
        # plots beside it scroll (see _CSS: sticky, with the controls scrolling inside it).
        side = widgets.VBox([readouts_box, actions_box, controls_box],
                            layout=widgets.Layout(width="350px", flex="0 0 350px"))
        side.add_class("tk-side")
        body = widgets.HBox([side, plots_box],
                            layout=widgets.Layout(flex_flow="row wrap", align_items="flex-start"))
        body.add_class("tk-body")
        self.widget = widgets.VBox([widgets.HTML(_CSS), self._header, body,
                                    self.requirements, self._values_box])
        self.widget.add_class("tk-app")
        self._refresh_text()

    def _make_slider(self, t) -> widgets.Widget:
        lo, hi = float(t.minimum), float(t.maximum)
        value = float(t.get(self.design))
        # A slider clamps silently; widen its range rather than misreport the design.
        if math.isfinite(value):
            lo, hi = min(lo, value), max(hi, value)
        label = _label(t)
        common = dict(continuous_update=True, readout=True, tooltip=label,
                      layout=widgets.Layout(width="330px", margin="0 0 4px 0"))
        if getattr(t, "log", False):
            if lo <= 0:
                raise ValueError(f"log control {t.key!r} needs a positive minimum, not {lo!r}")
            lmin, lmax = math.log10(lo), math.log10(hi)
            if math.isfinite(value) and value > 0:
                # Put the design's own value on a step, so the page does not round it.
                lmin = math.log10(value) - math.floor((math.log10(value) - lmin) / LOG_STEP_DECADES + 1e-9) \
                    * LOG_STEP_DECADES
            slider = widgets.FloatLogSlider(value=value, base=10.0, min=lmin, max=lmax, step=LOG_STEP_DECADES,
                                            readout_format=".3r", **common)
            slider.add_class("tk-log-slider")
        elif _integer_control(t, lo, hi):
            slider = widgets.IntSlider(value=int(round(value)), min=int(lo), max=int(hi),
                                       step=max(int(t.step), 1), **common)
        else:
            step = float(t.step) if t.step else (hi - lo) / 200.0
            slider = widgets.FloatSlider(value=value, min=lo, max=hi, step=step, readout_format=".4r",
                                         **common)
        slider.add_class("tk-control")
        slider.add_class(f"tk-control-{_css_name(t.key)}")
        slider.observe(lambda change, key=t.key: self._on_control(key, change), names="value")
        return slider

    def _make_typed(self, t) -> widgets.Text:
        unit = f" {t.unit}" if t.unit else ""
        box = widgets.Text(value="", placeholder=f"type an exact value, e.g. {t.get(self.design):.6g}{unit}",
                           continuous_update=False, layout=widgets.Layout(width="230px", margin="0 0 6px 0"))
        box.add_class("tk-typed")
        box.add_class(f"tk-typed-{_css_name(t.key)}")
        box.observe(lambda change, key=t.key: self.type_value(key, change["new"]), names="value")
        return box

    def type_value(self, key: str, text: str) -> SizingResult:
        """Apply a value typed by a person ("50", "50 ms", "0.05 s") exactly as typed.

        A value outside the control's range, or text that is not a value of
        the control's unit, is not applied; the reason is shown in the
        dashboard (and kept in :attr:`error`).

        Parameters
        ----------
        key : str
            The control's key.
        text : str
            The typed text; empty text does nothing.

        Returns
        -------
        SizingResult
            The new result, or the current one when the value was not applied.
        """
        t = self._by_key[key]
        if not str(text).strip():
            return self.result
        try:
            value = t.parse(str(text))
        except (TurnkitError, ValueError) as err:
            self.error = str(err)
            self._show_message(self.error, error=True)
            return self.result
        if not t.in_range(value):
            unit = f" {t.unit}" if t.unit else ""
            self.error = (f"{_label(t)}: {text.strip()} is outside this control's range "
                          f"{t.minimum:.6g} to {t.maximum:.6g}{unit}; not applied (edit the design file for values "
                          "beyond it)")
            self._show_message(self.error, error=True)
            return self.result
        before = self.design
        result = self.set(**{key: value})
        if not self.error:
            self.typed[key].value = ""
            unit = f" {t.unit}" if t.unit else ""
            note = t.explain(before, self.design) if getattr(t, "explain", None) else ""
            self._show_message(f"{_label(t)} set to {value:.15g}{unit}" + (f"; {note}" if note else ""))
        return result

    def _make_choice(self, c) -> widgets.Widget:
        options = [(_choice_label(c.key, value), value) for value in c.choices]
        current = c.get(self.design)
        if current not in c.choices:
            options.append((str(current), current))
        dropdown = widgets.Dropdown(options=options, value=current, tooltip=_label(c),
                                    layout=widgets.Layout(width="318px", margin="0 0 6px 0"))
        dropdown.add_class("tk-control")
        dropdown.add_class(f"tk-control-{_css_name(c.key)}")
        dropdown.observe(lambda change, key=c.key: self._on_control(key, change), names="value")
        return dropdown

    def _ordered_curves(self, result: SizingResult):
        by_key = {c.key: c for c in result.curves}
        ordered = [by_key.pop(k) for k in PLOT_ORDER if k in by_key]
        return ordered + list(by_key.values())

    def _add_plot(self, curve) -> None:
        handles = plots.build_figure(curve)
        model = BokehModel(handles.layout)
        model.add_class("tk-plot")
        model.add_class(f"tk-plot-{_css_name(curve.key)}")
        self.figures[curve.key] = handles
        self.plot_widgets[curve.key] = model

    # ------------------------------------------------------------------ updating
    def _on_control(self, key: str, change: dict) -> None:
        if self._syncing:
            return
        widget = change.get("owner")
        from_browser = widget is not None and _from_browser(widget)
        if from_browser and key not in self._pending and _within_half_step(widget, change["new"],
                                                                            self._by_key[key].get(self.design)):
            # The browser snaps a value it is sent to the slider's steps and sends
            # the snapped value back; that is rounding, not a change by the user.
            return
        self._pending[key] = change["new"]
        if self.debounce_s > 0 and from_browser:
            try:
                loop = asyncio.get_running_loop()
            except RuntimeError:
                loop = None
            if loop is not None:
                if self._timer is None:
                    self._timer = loop.call_later(self.debounce_s, self._flush)
                return
        self._flush()

    def _flush(self) -> None:
        self._timer = None
        pending, self._pending = self._pending, {}
        if pending:
            self.set(**pending)

    def set(self, **values: Any) -> SizingResult:
        """Apply control values by key, re-size and refresh every view.

        Parameters
        ----------
        **values
            Control key to new value, in the control's unit (see
            :attr:`controls`).

        Returns
        -------
        SizingResult
            The new result; on a rejected value the previous one, with the
            reason shown in the dashboard and kept in :attr:`error`.

        Raises
        ------
        TypeError
            For a key that is not one of the controls.
        """
        unknown = sorted(set(values) - set(self._by_key))
        if unknown:
            raise TypeError(f"unknown control {', '.join(map(repr, unknown))}; "
                            f"known: {', '.join(self._by_key)}")
        start = time.perf_counter()
        design = self.design
        try:
            for key, value in values.items():
                design = self._by_key[key].set(design, value)
            result = self._size(design)
        except (TurnkitError, ValueError) as err:
            self.error = str(err)
            self._show_message(self.error, error=True)
            return self.result
        self.error = ""
        # A control that also changed something else (a planetary stage's planet teeth) says so.
        notes = [t.explain(self.design, design) for t in (self._by_key[k] for k in values)
                 if getattr(t, "explain", None)]
        self._show_message("; ".join(n for n in notes if n))
        self._apply(design, result)
        self.last_update_s = time.perf_counter() - start
        return result

    def _apply(self, design, result: SizingResult) -> None:
        self.design, self.result = design, result
        present = {curve.key for curve in result.curves}
        for curve in result.curves:
            handles = self.figures.get(curve.key)
            if handles is not None:
                plots.update(handles, curve)
        for key, model in self.plot_widgets.items():
            # A plot the engine no longer returns for this design would show stale data.
            model.layout.display = None if key in present else "none"
        self._sync_controls()
        self._refresh_text()

    def _sync_controls(self) -> None:
        # One control may move others (overall reduction vs. stage teeth):
        # show what the design now holds, without re-entering the update.
        self._syncing = True
        try:
            for key, control in self.controls.items():
                value = self._by_key[key].get(self.design)
                if isinstance(control, widgets.Dropdown):
                    if control.value != value:
                        control.value = value
                    continue
                if isinstance(control, widgets.IntSlider):
                    value = int(round(value))
                if not _close(control.value, value):
                    if isinstance(control, widgets.FloatLogSlider):
                        control.min = min(control.min, math.log10(value))
                        control.max = max(control.max, math.log10(value))
                    else:
                        control.min = min(control.min, value)
                        control.max = max(control.max, value)
                    control.value = value
        finally:
            self._syncing = False

    def _click(self, action: Callable[[], Any]) -> None:
        # A button has no caller to raise to: show the reason in the dashboard.
        try:
            action()
        except (TurnkitError, ValueError, OSError) as err:
            self.error = str(err)
            self._show_message(self.error, error=True)

    def _show_message(self, text: str, *, error: bool = False) -> None:
        cls = "tk-message-error" if error else "tk-message-ok"
        self.message.value = (f"<div id='tk-message-text' class='{cls}'>{html.escape(text)}</div>"
                              if text else "")

    # ------------------------------------------------------------------ text views
    def _refresh_text(self) -> None:
        r = self.result
        failed = len(r.failed_checks) + sum(1 for s in r.scenarios if not s.passed)
        total = len(r.checks) + len(r.scenarios)
        if failed:
            badge = f"<span id='tk-status-text' class='tk-badge tk-fail'>{failed} of {total} fail</span>"
        else:
            badge = f"<span id='tk-status-text' class='tk-badge tk-pass'>{total} of {total} pass</span>"
        source = f" · <code>{html.escape(self.path.name)}</code>" if self.path is not None else ""
        self._header.value = (f"<div class='tk-header'><span class='tk-title'>{html.escape(r.design_name)}"
                              f"</span>{badge}<span class='tk-card-label'>turnkit {html.escape(r.turnkit_version)}"
                              f"{source}</span></div>"
                              f"<div class='tk-header-caution' id='tk-header-caution'>{html.escape(HEADER_CAUTION)}</div>")
        for readout in READOUTS:
            value = _first_value(r, readout.keys)
            box = self.readouts[readout.name]
            if value is None:
                box.layout.display = "none"
                box.value = ""
                continue
            box.layout.display = None
            box.value = (f"<div class='tk-card-label' title='{html.escape(value.label, quote=True)}'>"
                         f"{html.escape(readout.label)}</div>"
                         f"<div class='tk-card-value' id='tk-{readout.name}-value'>"
                         f"{html.escape(value.formatted())}</div>")
        self.requirements.value = requirements_html(r)
        self.values_table.value = values_html(r)

    # ------------------------------------------------------------------ buttons
    def save(self) -> Path:
        """Write the tuned design back to the design file it was loaded from.

        Returns
        -------
        pathlib.Path
            The file written.
        """
        if self.path is None:
            raise TurnkitError("no design file to save to: open the dashboard from a design file")
        save = self._save
        if save is None and self._loaded is not None:
            from ..designfile import save_loaded_design

            self._loaded = save_loaded_design(self.design, self._loaded)
        else:
            if save is None:
                from ..designfile import save_design as save
            save(self.design, self.path, overwrite=True)
        self._saved_design = self.design
        self.files.value = (f"<div class='tk-files' id='tk-saved'>Saved <code>{html.escape(self.path.name)}"
                            f"</code> at {time.strftime('%H:%M:%S')}</div>")
        return self.path

    def export(self) -> tuple[Path, ...]:
        """Write the sizing summary as HTML, Markdown and JSON.

        The files go to :attr:`export_dir` (the notebook's folder by default)
        and are named after the design file, e.g. ``my-actuator-summary.html``.

        Returns
        -------
        tuple of pathlib.Path
            The files written.
        """
        export = self._export
        if export is None:
            from ..export import write_summary as export
        folder = self.export_dir if self.export_dir is not None else Path.cwd()
        stem = self.path.stem if self.path is not None else (_css_name(self.design.name) or "design")
        written = []
        for suffix in (".html", ".md", ".json"):
            target = folder / f"{stem}-summary{suffix}"
            export(self.result, target, overwrite=True)
            written.append(target)
        names = ", ".join(f"<code>{html.escape(p.name)}</code>" for p in written)
        self.files.value = (f"<div class='tk-files' id='tk-exported'>Exported {names} to "
                            f"<code>{html.escape(str(folder))}</code> at {time.strftime('%H:%M:%S')}</div>")
        return tuple(written)

    def reset(self) -> SizingResult:
        """Go back to the design as loaded (or as last saved) and re-size it."""
        design = self._saved_design
        result = self._size(design)
        self.error = ""
        self._show_message("")
        self._apply(design, result)
        return result

    # ------------------------------------------------------------------ display
    def show(self) -> None:
        """Display the dashboard in the notebook (loads BokehJS into the page first)."""
        from IPython.display import display

        _load_bokehjs()
        display(self.widget)
        _describe_log_sliders()

    def _ipython_display_(self) -> None:
        self.show()

    def __repr__(self) -> str:
        where = f" from {self.path}" if self.path is not None else ""
        return f"<Dashboard {self.result.design_name!r}{where}: {len(self.controls)} controls>"


# ---------------------------------------------------------------------- helpers
def _load_bokehjs() -> None:
    # INLINE: the page may be offline; BokehJS must be on the page before any
    # BokehModel view renders, and a reloaded page needs it again.
    from bokeh.io import output_notebook
    from bokeh.resources import INLINE

    output_notebook(INLINE, hide_banner=True)


#: Page script: a log slider's handle reports the exponent as its value (aria-valuenow); give screen
#: readers the real value with its unit (aria-valuetext, from the readout and the label shown above
#: the control) and the label itself (aria-label). Installed once per page; it follows every change.
_LOG_SLIDER_TEXT_JS = r"""
(function () {
  if (window.turnkitDescribeLogSliders) { window.turnkitDescribeLogSliders(); return; }
  const labelOf = (box) => { const prev = box.previousElementSibling;
    const el = prev && prev.querySelector('.tk-control-label'); return el ? el.textContent.trim() : ''; };
  const unitOf = (label) => { const m = /\(([^()]*)\)\s*$/.exec(label); return m ? ' ' + m[1] : ''; };
  const describe = () => {
    document.querySelectorAll('.tk-app .tk-log-slider').forEach((box) => {
      const handle = box.querySelector('.noUi-handle');
      const readout = box.querySelector('.widget-readout');
      if (!handle || !readout) { return; }
      const label = labelOf(box);
      const text = readout.textContent.trim() + unitOf(label);
      if (handle.getAttribute('aria-valuetext') !== text) { handle.setAttribute('aria-valuetext', text); }
      if (label && handle.getAttribute('aria-label') !== label) { handle.setAttribute('aria-label', label); }
    });
  };
  let queued = false;
  const soon = () => { if (!queued) { queued = true; requestAnimationFrame(() => { queued = false; describe(); }); } };
  window.turnkitDescribeLogSliders = describe;
  new MutationObserver(soon).observe(document.body, {subtree: true, childList: true, characterData: true,
    attributes: true, attributeFilter: ['aria-valuetext', 'aria-valuenow']});
  describe();
})();
"""


def _describe_log_sliders() -> None:
    from IPython.display import Javascript, display

    display(Javascript(_LOG_SLIDER_TEXT_JS))


def _default_size(path: Path | None):
    from ..sizing import size

    if path is None:
        return size
    folder = path.parent

    def size_next_to_file(design):
        # Recorded motion traces are named relative to the design file.
        return size(design, base_dir=folder)

    return size_next_to_file


def _default_tunables(design) -> tuple[Any, ...]:
    from ..tuning import tunables_for

    return tuple(tunables_for(design))


def _label(t) -> str:
    """The control's label with its unit, once (tunable labels may already carry it)."""
    if not t.unit or f"({t.unit})" in t.label:
        return micro_sign(t.label)
    return micro_sign(f"{t.label} ({t.unit})")


def _choice_label(key: str, value: Any) -> str:
    if key == "battery.chemistry":
        from ..battery import cell

        try:
            return cell(value).name
        except (KeyError, ValueError):
            return str(value)
    return str(value)


def _integer_control(t, lo: float, hi: float) -> bool:
    if getattr(t, "integer", False):
        return True
    step = float(t.step or 0)
    return (not getattr(t, "log", False) and step >= 1 and step.is_integer()
            and float(lo).is_integer() and float(hi).is_integer())


def _within_half_step(widget, new: Any, current: Any) -> bool:
    """True when ``new`` is ``current`` rounded to one of the slider's steps."""
    if isinstance(widget, widgets.FloatLogSlider):
        if new <= 0 or current <= 0:
            return False
        return abs(math.log(new, widget.base) - math.log(current, widget.base)) <= widget.step / 2 * (1 + 1e-9)
    if isinstance(widget, widgets.FloatSlider):
        return abs(float(new) - float(current)) <= widget.step / 2 * (1 + 1e-9)
    return False


def _close(a: float, b: float) -> bool:
    return math.isclose(float(a), float(b), rel_tol=1e-9, abs_tol=1e-12)


def _first_value(result: SizingResult, keys: Sequence[str]) -> Value | None:
    for key in keys:
        for v in result.values:
            if v.key == key:
                return v
    return None


def _count_text(n: float) -> str:
    """A whole count with thin groups of three digits ("1 577 880 000")."""
    return f"{int(n):,}".replace(",", "\u2009")


def _check_row(c: Check) -> str:
    verdict = "PASS" if c.passed else "FAIL"
    cls = "tk-pass" if c.passed else "tk-fail"
    # Numbers and their units stay on one line; only the label and the advice wrap.
    return (f"<tr class='{cls}' data-key='{html.escape(c.key)}'><td>{html.escape(c.label)}</td>"
            f"<td class='tk-num'>{html.escape(format_number(c.value, c.unit))}</td>"
            f"<td class='tk-num'>{html.escape(c.comparison)} {html.escape(format_number(c.target, c.unit))}</td>"
            f"<td class='tk-num'>{html.escape(_percent(c.margin))}</td><td class='tk-verdict'>{verdict}</td>"
            f"<td class='tk-advice'>{html.escape(micro_sign(c.advice))}</td></tr>")


def requirements_html(result: SizingResult) -> str:
    """HTML of the requirement panel: checks, simulated scenarios, warnings and cautions.

    Parameters
    ----------
    result : SizingResult

    Returns
    -------
    str
        Escaped HTML with the ids ``tk-checks-table`` and ``tk-scenarios-table``.
    """
    parts = ["<div class='tk-section-title'>Requirements</div>"]
    if result.checks:
        parts.append("<table class='tk-table tk-checks' id='tk-checks-table'><thead><tr><th>requirement</th>"
                     "<th>design gives</th><th>target</th><th>margin</th><th>verdict</th><th>what to change"
                     "</th></tr></thead><tbody>")
        parts.extend(_check_row(c) for c in result.checks)
        parts.append("</tbody></table>")
    else:
        parts.append("<p class='tk-advice'>The design file states no requirements.</p>")
    if result.scenarios:
        parts.append("<div class='tk-section-title'>Motion while asleep (simulated)</div>"
                     "<table class='tk-table tk-scenarios' id='tk-scenarios-table'><thead><tr><th>scenario</th>"
                     "<th>peak motor speed</th><th>polls</th><th>final count error</th><th>ambiguous</th>"
                     "<th>silent</th><th>overflow</th><th>largest output error</th><th>verdict</th></tr>"
                     "</thead><tbody>")
        for s in result.scenarios:
            cls, verdict = ("tk-pass", "PASS") if s.passed else ("tk-fail", "FAIL")
            parts.append(
                f"<tr class='{cls}' data-key='{html.escape(s.name)}'><td>{html.escape(s.name)}"
                f"{' <span class=tk-advice>(' + html.escape(s.note) + ')</span>' if s.note else ''}</td>"
                f"<td class='tk-num'>{html.escape(format_number(s.peak_motor_speed_rpm, 'rpm'))}</td>"
                f"<td class='tk-num'>{_count_text(s.polls)}</td>"
                f"<td class='tk-num'>{int(s.final_count_error_qt)} quarter-turns</td><td>{int(s.ambiguous_count)}</td>"
                f"<td>{int(s.silent_error_count)}</td><td>{int(s.overflow_count)}</td>"
                f"<td class='tk-num'>{html.escape(format_number(s.max_output_error, s.output_unit))}</td>"
                f"<td class='tk-verdict'>{verdict}</td></tr>")
        parts.append("</tbody></table>")
    if result.warnings:
        parts.append("<div class='tk-section-title'>Warnings</div><ul class='tk-notes tk-warnings'>")
        parts.extend(f"<li>{html.escape(micro_sign(w))}</li>" for w in result.warnings)
        parts.append("</ul>")
    if result.cautions:
        parts.append("<div class='tk-section-title'>Cautions</div><ul class='tk-notes tk-caution'>")
        parts.extend(f"<li>{html.escape(c)}</li>" for c in result.cautions)
        parts.append("</ul>")
    return "".join(parts)


def values_html(result: SizingResult) -> str:
    """HTML table of every derived value, grouped by section, with its note."""
    groups: dict[str, list[Value]] = {}
    for v in result.values:
        groups.setdefault(v.group or "other", []).append(v)
    rows = []
    for group, values in groups.items():
        rows.append(f"<tr><th colspan='3'>{html.escape(group)}</th></tr>")
        for v in values:
            rows.append(f"<tr data-key='{html.escape(v.key)}'><td>{html.escape(v.label)}</td>"
                        f"<td class='tk-num'>{html.escape(micro_sign(v.formatted()))}</td>"
                        f"<td class='tk-advice'>{html.escape(micro_sign(v.note))}</td></tr>")
    return f"<table class='tk-table' id='tk-values-table'><tbody>{''.join(rows)}</tbody></table>"
