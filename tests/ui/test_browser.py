"""The dashboard in a real browser: JupyterLab in headless Chromium, driven by Playwright.

One JupyterLab server and one Chromium per session. The test opens a demo
notebook, runs all cells, checks the header's one-line caution and the
badge's wording ("9 of 9 pass"), moves the poll-period slider, checks that
its handle tells screen readers the value with its unit, and checks that the
battery-life readout and the marker on the life-versus-poll-period plot
changed to the values the sizing engine gives for the new period, that
every plot was painted, and that no widget error appeared. Screenshots go
to ``test-artifacts/``.

Chromium is Debian's ``/usr/bin/chromium`` (Playwright never downloads a
browser here). Without it the test is skipped on a developer machine and
fails in CI (``CI=true``).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "test-artifacts"
CHROMIUM = Path("/usr/bin/chromium")
TOKEN = "turnkit-browser-test"
NOTEBOOK = "irrigation-gate-valve"


def _missing(reason: str):
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail(f"{reason} (required in CI)")
    pytest.skip(reason)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_lab(tmp: Path, log_path: Path):
    """Start JupyterLab serving a copy of notebooks/ and demo/ under ``tmp``; return (url, proc)."""
    root = tmp / "serve"
    shutil.copytree(ROOT / "notebooks", root / "notebooks")
    shutil.copytree(ROOT / "demo", root / "demo")
    settings = tmp / "lab-settings"
    notify = settings / "@jupyterlab" / "apputils-extension"
    notify.mkdir(parents=True)
    (notify / "notification.jupyterlab-settings").write_text(
        json.dumps({"fetchNews": "false", "checkForUpdates": False}))
    tracker = settings / "@jupyterlab" / "notebook-extension"
    tracker.mkdir(parents=True)
    # Paint every cell: the default leaves off-screen outputs unrendered.
    (tracker / "tracker.jupyterlab-settings").write_text(json.dumps({"windowingMode": "none"}))
    env = dict(os.environ, JUPYTER_CONFIG_DIR=str(tmp / "config"), JUPYTER_RUNTIME_DIR=str(tmp / "runtime"),
               JUPYTERLAB_SETTINGS_DIR=str(settings), JUPYTERLAB_WORKSPACES_DIR=str(tmp / "workspaces"))
    port = _free_port()
    url = f"http://127.0.0.1:{port}"
    cmd = [sys.executable, "-m", "jupyter", "lab", "--no-browser", "--allow-root",
           "--ServerApp.ip=127.0.0.1", f"--ServerApp.port={port}", "--ServerApp.port_retries=0",
           f"--IdentityProvider.token={TOKEN}", f"--ServerApp.root_dir={root}",
           "--LabApp.news_url=None", "--LabApp.extension_manager=readonly",
           "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate"]
    log = open(log_path, "w")
    proc = subprocess.Popen(cmd, env=env, stdout=log, stderr=subprocess.STDOUT, start_new_session=True)
    deadline = time.monotonic() + 60
    while True:
        if proc.poll() is not None:
            raise RuntimeError(f"JupyterLab exited with {proc.returncode}; log: {log_path}")
        try:
            with urllib.request.urlopen(f"{url}/api/status?token={TOKEN}", timeout=2) as r:
                if r.status == 200:
                    break
        except OSError:
            pass
        if time.monotonic() > deadline:
            stop_lab(proc)
            raise RuntimeError(f"JupyterLab did not answer within 60 s; log: {log_path}")
        time.sleep(0.25)
    return url, proc


def stop_lab(proc) -> None:
    """Stop the server's process group (its kernels go with it)."""
    try:
        os.killpg(proc.pid, signal.SIGTERM)
        proc.wait(15)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait(5)
    except ProcessLookupError:
        pass


def launch_browser(playwright, profile: Path, blocked: list[str]):
    """Headless Debian Chromium kept on loopback; returns a persistent context."""
    ctx = playwright.chromium.launch_persistent_context(
        str(profile), executable_path=str(CHROMIUM), headless=True, viewport={"width": 1600, "height": 1000},
        args=["--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-quic", "--no-first-run",
              "--disable-background-networking", "--disable-component-update", "--disable-sync"])
    ctx.route(re.compile(r"^https?://(?!127\.0\.0\.1[:/])"),
              lambda route: (blocked.append(route.request.url), route.abort()))
    return ctx


@pytest.fixture(scope="session")
def lab(tmp_path_factory):
    if not CHROMIUM.exists():
        _missing(f"{CHROMIUM} not found (apt-get install chromium)")
    if not (ROOT / "demo" / f"{NOTEBOOK}.toml").exists():
        pytest.fail(f"demo/{NOTEBOOK}.toml is missing")
    ARTIFACTS.mkdir(exist_ok=True)
    tmp = tmp_path_factory.mktemp("lab")
    log_path = ARTIFACTS / "jupyterlab.log"
    url, proc = start_lab(tmp, log_path)
    yield url, log_path
    stop_lab(proc)


@pytest.fixture(scope="session")
def browser_context(tmp_path_factory, lab):
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        _missing("playwright is not installed")
    blocked: list[str] = []
    with sync_playwright() as p:
        ctx = launch_browser(p, tmp_path_factory.mktemp("chromium") / "profile", blocked)
        yield ctx, blocked
        ctx.close()


def _demo_design():
    from turnkit.designfile import load_design

    return load_design(ROOT / "demo" / f"{NOTEBOOK}.toml")


def _poll_tunable():
    from turnkit.tuning import tunables_for

    return next(t for t in tunables_for(_demo_design()) if t.key == "schedule.poll_period_ms")


def _on_log_grid(key: str, value: float) -> float:
    """The value the log slider lands on when ``value`` is typed (it snaps to its exponent steps)."""
    import math

    from turnkit.ui.dashboard import Dashboard

    slider = Dashboard(ROOT / "demo" / f"{NOTEBOOK}.toml").controls[key]
    exponent = min(max(math.log10(value), slider.min), slider.max)
    return 10.0 ** (slider.min + round((exponent - slider.min) / slider.step) * slider.step)


def _expected_after(tunable, period: float) -> tuple[str, str]:
    """Life readout and marker caption the dashboard must show for ``period`` (computed here)."""
    from turnkit.sizing import size
    from turnkit.ui.plots import format_number

    result = size(tunable.set(_demo_design(), period), base_dir=ROOT / "demo")
    curve = result.curve("life_vs_poll_period")
    marker = curve.markers[0]
    return (result.value("service_life_years").formatted(),
            f"{format_number(marker.x, curve.x_unit)} → {format_number(marker.y, curve.y_unit)}")


def test_dashboard_responds_to_the_poll_period_slider_in_jupyterlab(lab, browser_context):
    from playwright.sync_api import expect

    url, log_path = lab
    ctx, blocked = browser_context
    page = ctx.new_page()
    page.set_default_timeout(60_000)
    errors: list[str] = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    shot = ARTIFACTS / "browser-dashboard.png"
    tunable = _poll_tunable()
    tunable_css = re.sub(r"[^A-Za-z0-9]+", "-", tunable.key).strip("-").lower()
    try:
        page.goto(f"{url}/lab/tree/notebooks/{NOTEBOOK}.ipynb?token={TOKEN}")
        page.locator(".jp-NotebookPanel-toolbar .jp-DebuggerBugButton[aria-disabled='false']").wait_for(
            state="attached", timeout=90_000)
        page.locator(".lm-MenuBar-itemLabel", has_text=re.compile(r"^Run$")).click()
        page.get_by_role("menuitem", name=re.compile(r"^Run All Cells")).click()

        life = page.locator(".tk-app .tk-life #tk-life-value").first
        expect(life).to_contain_text("years", timeout=90_000)
        plots = page.locator(".tk-app .tk-plot canvas")
        expect(plots.first).to_be_visible()
        from turnkit.sizing import size

        n_plots = len(size(_demo_design(), base_dir=ROOT / "demo").curves)
        expect(page.locator(".tk-app .tk-plot")).to_have_count(n_plots)
        for i in range(n_plots):
            expect(page.locator(".tk-app .tk-plot").nth(i).locator("canvas").first).to_be_visible()
        assert page.locator(".jupyter-widgets-error-widget, .jp-Dialog").count() == 0
        # The header carries the one-line caution and a badge that counts what passes.
        from turnkit.ui.dashboard import HEADER_CAUTION

        expect(page.locator(".tk-app #tk-header-caution").first).to_have_text(HEADER_CAUTION)
        expect(page.locator(".tk-app #tk-header-caution").first).to_be_visible()
        result = size(_demo_design(), base_dir=ROOT / "demo")
        total = len(result.checks) + len(result.scenarios)
        assert result.passed
        expect(page.locator(".tk-app #tk-status-text").first).to_have_text(f"{total} of {total} pass")
        marker = page.locator(".tk-app .tk-plot-life-vs-poll-period .tk-cap-marker").first
        expect(marker).to_be_visible()
        life_before = life.inner_text()
        marker_before = marker.inner_text()
        canvas = page.locator(".tk-app .tk-plot-life-vs-poll-period canvas").first
        canvas.scroll_into_view_if_needed()
        png_before = canvas.screenshot()
        page.screenshot(path=str(ARTIFACTS / "browser-dashboard-before.png"), full_page=True)

        slider = page.locator(f".tk-app .tk-control-{tunable_css}").first
        readout = slider.locator(".widget-readout")
        old_text = readout.inner_text()
        new = _on_log_grid(tunable.key, float(old_text) * 2.0)
        life_expected, marker_expected = _expected_after(tunable, new)
        readout.click()
        page.keyboard.press("Control+A")
        page.keyboard.type(f"{new:.6g}")
        page.keyboard.press("Enter")
        expect(readout).not_to_have_text(old_text)
        assert float(readout.inner_text()) == pytest.approx(new, rel=0.01)
        # A log slider's handle tells screen readers the real value and its unit, not the exponent.
        handle = slider.locator(".noUi-handle").first
        expect(handle).to_have_attribute("aria-valuetext", f"{readout.inner_text().strip()} {tunable.unit}")
        expect(handle).to_have_attribute("aria-label", re.compile(re.escape(tunable.label)))

        expect(life).to_have_text(life_expected, timeout=30_000)
        expect(marker).to_contain_text(marker_expected, timeout=30_000)
        assert life.inner_text() != life_before
        assert marker.inner_text() != marker_before
        deadline = time.monotonic() + 10
        while canvas.screenshot() == png_before:      # the canvas repaints after the data arrive
            assert time.monotonic() < deadline, "life-vs-poll-period canvas did not repaint"
            time.sleep(0.2)
        assert page.locator(".jupyter-widgets-error-widget, .jp-Dialog").count() == 0
        assert not errors, errors
        page.locator(".tk-app").first.screenshot(path=str(shot))
    except BaseException:
        page.screenshot(path=str(ARTIFACTS / "browser-failure.png"), full_page=True)
        print(f"screenshot: {ARTIFACTS / 'browser-failure.png'}; server log: {log_path}; "
              f"requests kept off the network: {blocked}")
        raise
    finally:
        page.close()
