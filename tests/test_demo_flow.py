"""The README's demo flow (open the demo in Lab, tune, Save, Export, stop Lab) leaves a clone clean."""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = "notebooks/irrigation-gate-valve.ipynb"


def _git(*args, cwd) -> str:
    return subprocess.run(["git", *args], cwd=cwd, check=True, capture_output=True, text=True).stdout


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _children(pid: int) -> list[int]:
    try:
        text = Path(f"/proc/{pid}/task/{pid}/children").read_text()
    except OSError:
        return []
    return [int(p) for p in text.split()]


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


@pytest.fixture
def clone(tmp_path):
    if shutil.which("git") is None or not (ROOT / ".git").exists():
        pytest.skip("needs git and a git checkout of turnkit")
    target = tmp_path / "clone"
    subprocess.run(["git", "clone", "-q", str(ROOT), str(target)], check=True)
    assert _git("status", "--porcelain", cwd=target) == ""
    return target


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads child processes from /proc")
def test_demo_flow_works_on_a_copy_and_leaves_the_clone_clean(clone, tmp_path):
    pytest.importorskip("jupyterlab")
    pytest.importorskip("ipywidgets")
    env = {**os.environ, "PYTHONPATH": str(clone), "HOME": str(tmp_path / "home"),
           "JUPYTER_RUNTIME_DIR": str(tmp_path / "runtime")}
    demo = tmp_path / "my-demo"
    port = _free_port()
    # Command 1 of the README, on the clone's own turnkit.
    lab = subprocess.Popen(
        [sys.executable, "-m", "turnkit", "lab", NOTEBOOK, "--demo-dir", str(demo), "--no-browser",
         f"--port={port}", "--ServerApp.port_retries=0", "--IdentityProvider.token=demo-flow-test"],
        cwd=clone, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    lines: list[str] = []
    try:
        deadline = time.monotonic() + 180
        while time.monotonic() < deadline:
            line = lab.stdout.readline()
            if not line:
                break
            lines.append(line)
            if f":{port}/lab/tree/" in line:
                break
        log = "".join(lines)
        assert f"working on a copy of the demo in {demo}" in log, log
        # The printed URL opens the notebook itself, with the design file's folder in the file browser.
        assert f":{port}/lab/tree/{NOTEBOOK}?token=" in log, log
        assert f"Serving notebooks from local directory: {demo}" in log, log
        servers = _children(lab.pid)
        assert servers, "JupyterLab did not start as a child of turnkit lab"
    finally:
        lab.send_signal(signal.SIGTERM)
        try:
            status = lab.wait(timeout=60)
        finally:
            if lab.poll() is None:
                lab.kill()
            lab.stdout.close()
    # SIGTERM reached JupyterLab, which shut down; turnkit lab returned its status. No server is left running.
    assert status in (0, 128 + signal.SIGTERM)
    time.sleep(0.5)
    assert [pid for pid in servers if _alive(pid)] == []
    assert (demo / "demo" / "irrigation-gate-valve.toml").is_file()

    # Drag, Save and Export as the notebook's dashboard does, from the notebook's folder in the copy.
    script = textwrap.dedent("""
        from turnkit.ui import Dashboard
        dashboard = Dashboard("../demo/irrigation-gate-valve.toml")
        dashboard.set(**{"schedule.poll_period_ms": 30.0})
        dashboard.save()
        print(*dashboard.export())
    """)
    done = subprocess.run([sys.executable, "-c", script], cwd=demo / "notebooks", env=env,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert 'poll_period = "30 ms"' in (demo / "demo" / "irrigation-gate-valve.toml").read_text(encoding="utf-8")
    assert list((demo / "notebooks").glob("*.html"))

    # Command 2 of the README would now run on an unchanged checkout.
    assert _git("status", "--porcelain", cwd=clone) == ""
    assert (clone / "demo" / "irrigation-gate-valve.toml").read_bytes() == \
        (ROOT / "demo" / "irrigation-gate-valve.toml").read_bytes()


def test_the_demo_copy_keeps_the_users_earlier_edits(clone, tmp_path):
    env = {**os.environ, "PYTHONPATH": str(clone)}
    target = tmp_path / "copy"
    script = f"from turnkit.cli import copy_demo; print(len(copy_demo(__import__('pathlib').Path({str(target)!r}))))"
    first = subprocess.run([sys.executable, "-c", script], cwd=clone, env=env, capture_output=True, text=True,
                           check=True)
    assert int(first.stdout) > 0
    edited = target / "demo" / "irrigation-gate-valve.toml"
    edited.write_text(edited.read_text(encoding="utf-8") + "# my note\n", encoding="utf-8")
    again = subprocess.run([sys.executable, "-c", script], cwd=clone, env=env, capture_output=True, text=True,
                           check=True)
    assert int(again.stdout) == 0
    assert edited.read_text(encoding="utf-8").endswith("# my note\n")
    assert _git("status", "--porcelain", cwd=clone) == ""
