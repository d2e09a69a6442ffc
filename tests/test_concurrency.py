"""One writer at a time, readers that never break a writer, and messages instead of DuckDB tracebacks:
real child processes on real project folders."""
from __future__ import annotations

import asyncio
import logging
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from helpers import CHILD_ENV, ROOT, database_content, held_by_child, insert_prior_run, run_reval, settle, sigkill
from reval.data.lock import ProjectInUse, lock_path
from reval.service import actions
from reval.service.project import open_project
from tui.app import RevalApp


@pytest.fixture
def imported(small_project: Path) -> Path:
    actions.import_data(small_project)
    return small_project


COMMANDS = [["approve", "north"], ["import"], ["value"], ["log"], ["batches"], ["study"], ["export", "roll.csv"]]


def test_a_command_while_another_process_writes_says_who_and_exits_1(imported: Path) -> None:
    """Issue finding: while a fit ran, approve, log, batches, export, import, value and study each exited with
    a raw `_duckdb.IOException` traceback."""
    with held_by_child(imported, write=True) as holder:
        for command in COMMANDS:
            started = time.monotonic()
            done = run_reval(*command, "--project", str(imported), env={"REVAL_WAIT": "0.5"}, cwd=imported)
            waited = time.monotonic() - started
            assert done.returncode == 1, (command, done.stderr)
            assert "Traceback" not in done.stderr and "IOException" not in done.stderr, (command, done.stderr)
            assert f"project in use by process {holder.pid} (reval fit)" in done.stderr, (command, done.stderr)
            assert "try again" in done.stderr and waited >= 0.5, command


def test_a_second_writer_waits_for_the_first_to_finish(imported: Path) -> None:
    """Within the stated wait, a second writer simply runs after the first one."""
    before = database_content(imported / "reval.duckdb")
    with held_by_child(imported, write=True, seconds=1.5) as holder:
        started = time.monotonic()
        with open_project(imported, write=True):
            waited = time.monotonic() - started
        assert holder.wait() == 0 and waited > 0.3                # it waited for the holder, which ended well
    assert database_content(imported / "reval.duckdb") == before
    assert not lock_path(imported / "reval.duckdb").exists()


def test_a_reader_never_breaks_a_writer(imported: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The app reads with read-only connections; a writer that starts while one is open waits for it instead
    of failing (and a reader gets the same clear message when a writer holds the project too long)."""
    with held_by_child(imported, write=False, seconds=1.0):
        result = actions.prepare_sales(imported)                  # a writing step, started during the read
    assert result["qualified"] >= 1
    monkeypatch.setenv("REVAL_WAIT", "0.3")
    with held_by_child(imported, write=True) as holder:
        with pytest.raises(ProjectInUse, match=f"process {holder.pid} \\(reval fit\\)"):
            actions.batch_states(imported)


def test_a_stale_lock_of_a_killed_writer_is_detected_and_removed(imported: Path,
                                                                 caplog: pytest.LogCaptureFixture) -> None:
    with held_by_child(imported, write=True) as holder:
        sigkill(holder)
    lock = lock_path(imported / "reval.duckdb")
    assert lock.exists()                                          # left behind by the killed process
    with caplog.at_level(logging.WARNING, logger="reval"), open_project(imported, write=True):
        assert lock.exists()                                      # now ours
    assert f"removed a stale lock left by process {holder.pid} (reval fit)" in caplog.text
    assert not lock.exists()


def test_the_app_shows_what_the_core_cleaned_up(imported: Path) -> None:
    """A notice the core logs while the app works (here: a stale lock removed by the value step) reaches
    the app's messages instead of the terminal under it."""
    actions.prepare_sales(imported)
    insert_prior_run(imported, "run-a", 1.0)
    with held_by_child(imported, write=True) as holder:
        sigkill(holder)
    asyncio.run(_app_notice(imported, holder.pid))


async def _app_notice(folder: Path, pid: int) -> None:
    app = RevalApp(folder)
    async with app.run_test() as pilot:
        await settle(pilot)
        await pilot.press("v")
        await settle(pilot)
        await pilot.press("enter")                  # stage, as the confirmation offers
        await settle(pilot)
        await pilot.pause()
        assert any(severity == "warning" and f"removed a stale lock left by process {pid}" in text
                   for severity, text in app.messages), app.messages


def test_a_closed_pipe_ends_quietly(imported: Path) -> None:
    """Issue finding: `reval study --json | head` ended in a BrokenPipeError traceback. The reading end of the
    pipe is closed before the command writes, as `head` does once it has its lines."""
    read, write = os.pipe()
    os.close(read)
    try:
        done = subprocess.run([sys.executable, "-m", "reval.cli", "log", "--json", "--project", str(imported)],
                              stdout=write, stderr=subprocess.PIPE, text=True, env=CHILD_ENV, cwd=ROOT)
    finally:
        os.close(write)
    assert done.stderr == "" and done.returncode == 1
