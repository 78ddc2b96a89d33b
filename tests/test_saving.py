"""Saving a design file never loses what someone else wrote, and never reports a save that did not stick."""

from __future__ import annotations

import dataclasses
import multiprocessing
import os
import stat
import threading
from pathlib import Path

import pytest

from turnkit.designfile import load_design, load_design_file, save_design, save_loaded_design
from turnkit.errors import DesignFileError

TEXT = """\
# a commented design
format_version = 1
name = "saved valve"

[[gear_train]]
kind = "lead_screw"
pitch = "2 mm"   # the lead

[schedule]
poll_period = "20 ms"
"""


def _design_file(tmp_path: Path) -> Path:
    path = tmp_path / "valve.toml"
    path.write_text(TEXT, encoding="utf-8")
    return path


def _with_period(design, period_ms: float):
    return dataclasses.replace(design, schedule=dataclasses.replace(design.schedule, poll_period_ms=period_ms))


def test_saving_over_a_file_changed_since_loading_is_refused_and_keeps_the_other_edit(tmp_path):
    # A save used to merge against the file as it was on disk, reverting a colleague's edit.
    path = _design_file(tmp_path)
    loaded = load_design_file(path)
    colleague = TEXT.replace('"2 mm"', '"3 mm"') + '\n[[motion]]\nname = "push"\nkind = "constant"\n' \
                                                   'speed = "10 rpm"\nduration = "1 s"\n'
    path.write_text(colleague, encoding="utf-8")
    with pytest.raises(DesignFileError, match="changed on disk since"):
        save_loaded_design(_with_period(loaded.design, 50.0), loaded)
    assert path.read_text(encoding="utf-8") == colleague
    assert not (tmp_path / "valve.toml.bak").exists()


def test_saving_an_unchanged_file_succeeds_and_chains_to_the_next_save(tmp_path):
    path = _design_file(tmp_path)
    loaded = load_design_file(path)
    first = save_loaded_design(_with_period(loaded.design, 50.0), loaded)
    second = save_loaded_design(_with_period(first.design, 60.0), first)
    assert load_design(path).schedule.poll_period_ms == 60.0
    assert second.sha256 == load_design_file(path).sha256
    assert "# the lead" in path.read_text(encoding="utf-8")


def test_save_through_a_symlink_edits_the_target_and_keeps_the_link(tmp_path):
    path = _design_file(tmp_path)
    link = tmp_path / "link.toml"
    link.symlink_to(path.name)
    design = load_design(link)
    save_design(_with_period(design, 40.0), link, overwrite=True)
    assert link.is_symlink()
    assert load_design(path).schedule.poll_period_ms == 40.0
    assert (tmp_path / "valve.toml.bak").read_text(encoding="utf-8") == TEXT


def test_a_read_only_file_is_refused_and_left_alone(tmp_path):
    path = _design_file(tmp_path)
    design = load_design(path)
    path.chmod(stat.S_IRUSR | stat.S_IRGRP)
    try:
        with pytest.raises(DesignFileError, match="read-only"):
            save_design(_with_period(design, 40.0), path, overwrite=True)
        assert path.read_text(encoding="utf-8") == TEXT
    finally:
        path.chmod(stat.S_IRUSR | stat.S_IWUSR)


def test_a_folder_in_place_of_the_file_is_refused(tmp_path):
    design = load_design(_design_file(tmp_path))
    (tmp_path / "folder.toml").mkdir()
    with pytest.raises(DesignFileError, match="not a regular file"):
        save_design(design, tmp_path / "folder.toml", overwrite=True)


def test_temporary_files_of_a_killed_save_are_removed_by_the_next_save(tmp_path):
    path = _design_file(tmp_path)
    design = load_design(path)
    # A process id that does not exist (above Linux's pid_max).
    leftover = tmp_path / ".valve.toml.99999999.abc123.tmp"
    leftover.write_text("half a file", encoding="utf-8")
    save_design(_with_period(design, 40.0), path, overwrite=True)
    assert not leftover.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_concurrent_saves_from_threads_report_exactly_one_success(tmp_path):
    path = _design_file(tmp_path)
    loaded = load_design_file(path)
    outcomes: list[str] = []
    lock = threading.Lock()
    barrier = threading.Barrier(8)

    def save(period):
        barrier.wait()
        try:
            save_loaded_design(_with_period(loaded.design, period), loaded)
            result = f"saved {period}"
        except DesignFileError:
            result = "refused"
        with lock:
            outcomes.append(result)

    threads = [threading.Thread(target=save, args=(30.0 + i,)) for i in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    saved = [o for o in outcomes if o.startswith("saved")]
    assert len(saved) == 1, outcomes
    # The one reported as saved is the one on disk.
    assert load_design(path).schedule.poll_period_ms == float(saved[0].split()[1])


def _save_in_process(args):
    from turnkit.designfile import LoadedDesign, loads_design

    path, sha256, period = args
    base = loads_design(TEXT)
    try:
        save_loaded_design(_with_period(base, period), LoadedDesign(base, Path(path), sha256))
        return period
    except DesignFileError:
        return None


def test_concurrent_saves_from_processes_report_exactly_one_success(tmp_path):
    path = _design_file(tmp_path)
    loaded = load_design_file(path)
    context = multiprocessing.get_context("fork" if hasattr(os, "fork") else "spawn")
    with context.Pool(4) as pool:
        results = pool.map(_save_in_process, [(str(path), loaded.sha256, 30.0 + i) for i in range(8)])
    saved = [r for r in results if r is not None]
    assert len(saved) == 1, results
    assert load_design(path).schedule.poll_period_ms == saved[0]
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_plain_concurrent_saves_all_land_in_some_order(tmp_path):
    # Without a fingerprint each save takes its turn under the lock: the file ends as one of them, whole.
    path = _design_file(tmp_path)
    design = load_design(path)
    threads = [threading.Thread(target=save_design, args=(_with_period(design, 30.0 + i), path),
                                kwargs={"overwrite": True}) for i in range(6)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert load_design(path).schedule.poll_period_ms in {30.0 + i for i in range(6)}
    assert "# the lead" in path.read_text(encoding="utf-8")
