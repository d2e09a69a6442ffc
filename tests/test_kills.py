"""Every writing step killed (SIGKILL, no clean-up) at random moments in a child process leaves the project in
its before-state or its after-state; the next command that opens it for writing says what it cleaned up.

Each step first runs once to the end in a child (on its own copy): its duration sets the window the kills
are drawn from, and its database is the after-state to compare with. The kills then land uniformly between
a quarter of that time and a tenth beyond it, from the moment the child starts the step (the first quarter
is mostly imports; a kill just after the end checks the after-state). "Before" is the exact database content; "after" is
the reference run's row counts, event kinds and batch states (times and run ids differ between runs).
Seeds are fixed, so a failure can be replayed.
"""
from __future__ import annotations

import random
import shutil
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import pytest

from helpers import CHILD_ENV, database_content, export_state, insert_prior_run, query_frame, sigkill
from reval.data.lock import lock_path
from reval.service import actions
from reval.service.project import open_project

STEP = """\
import sys, time
from pathlib import Path
from reval.service import actions
from reval.service.project import open_project
folder, step, arg = Path(sys.argv[1]), sys.argv[2], sys.argv[3]

def fit():  # the writing step of `reval fit`, without the reference models (they only add rows to its transaction)
    from reval.model.run import fit_run
    with open_project(folder, write=True) as (config, store):
        fit_run(store, config, references=False)

steps = {"import": lambda: actions.import_data(folder),
         "fit": fit,
         "value": lambda: actions.stage_values(folder),
         "approve": lambda: actions.approve(folder, arg, "approved in a kill test"),
         "export": lambda: actions.export_roll(folder, Path(arg), partial=True)}
print("go", flush=True)
started = time.monotonic()
steps[step]()
print(f"{time.monotonic() - started:.3f}", flush=True)
"""
KILLS = 3


def _start(folder: Path, step: str, arg: str) -> subprocess.Popen[str]:
    child = subprocess.Popen([sys.executable, "-c", STEP, str(folder), step, arg], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True, env=CHILD_ENV)
    assert child.stdout is not None and child.stdout.readline().strip() == "go"
    return child


def _signature(folder: Path) -> dict[str, Any]:
    """What a step's outcome must reproduce: rows per table, the kinds of events in order, batch states."""
    content = database_content(folder / "reval.duckdb")
    kinds = query_frame(folder, "SELECT kind FROM events ORDER BY event_id")["kind"].tolist()
    states = sorted(query_frame(folder, "SELECT segment || ':' || state AS s FROM batches")["s"])
    return {"rows": {t: len(rows) for t, rows in content.items()}, "events": kinds, "batches": states}


def _kill_step(source: Path, tmp_path: Path, step: str, arg: str = "-", seed: int = 0, kills: int = KILLS) -> list[str]:
    """Run the step once to the end, then kill it `kills` times at random; returns 'before'/'after' per kill."""
    reference = Path(shutil.copytree(source, tmp_path / "reference"))
    (tmp_path / "reference-out").mkdir()
    out = _start(reference, step, arg.replace("{dir}", str(tmp_path / "reference-out")))
    stdout, stderr = out.communicate()
    assert out.returncode == 0, stderr
    seconds, after = float(stdout.split()[-1]), _signature(reference)
    before_content, before = database_content(source / "reval.duckdb"), _signature(source)
    rng, outcomes = random.Random(seed), []
    for k in range(kills):
        folder = Path(shutil.copytree(source, tmp_path / f"kill{k}"))
        (tmp_path / f"out{k}").mkdir()
        child = _start(folder, step, arg.replace("{dir}", str(tmp_path / f"out{k}")))
        time.sleep(rng.uniform(0.25, 1.1) * seconds)
        sigkill(child)
        with open_project(folder, write=True):                   # the next writer: stale lock, interrupted export
            pass
        assert not lock_path(folder / "reval.duckdb").exists()
        if database_content(folder / "reval.duckdb") == before_content:
            outcomes.append("before")
        else:
            assert _signature(folder) == after, f"kill {k} after {seconds:.2f} s window: neither before nor after"
            outcomes.append("after")
        if step == "export":
            assert export_state(folder, tmp_path / f"out{k}" / "roll.csv") == outcomes[-1]
    assert before != after
    return outcomes


@pytest.fixture
def demo(fitted_demo: Path, tmp_path: Path) -> Path:
    return Path(shutil.copytree(fitted_demo, tmp_path / "source"))


def test_killed_imports_leave_the_old_or_the_new_data_set(demo: Path, tmp_path: Path) -> None:
    parcels = demo / "parcels.csv"
    parcels.write_text(parcels.read_text().replace(",average,", ",good,", 50))   # a changed file: a real import
    _kill_step(demo, tmp_path, "import", seed=1)


def test_killed_fits_leave_no_run_or_a_whole_one(demo: Path, tmp_path: Path) -> None:
    config = demo / "reval.toml"                 # a lighter model, no references: the same writing, in less time
    config.write_text(config.read_text().replace("max_interactions = 4", "max_interactions = 0\nfolds = 2"))
    _kill_step(demo, tmp_path, "fit", seed=2, kills=2)    # the longest step: two kills keep the test short


def test_killed_value_steps_leave_the_old_or_the_new_batches(demo: Path, tmp_path: Path) -> None:
    insert_prior_run(demo, "run-kill", 1.1)
    _kill_step(demo, tmp_path, "value", seed=3)


def test_killed_approvals_leave_the_batch_staged_or_approved(demo: Path, tmp_path: Path) -> None:
    segment = actions.batch_states(demo)["segments"][0]["segment"]
    _kill_step(demo, tmp_path, "approve", segment, seed=4)


def test_killed_exports_leave_roll_manifest_and_event_in_agreement(demo: Path, tmp_path: Path) -> None:
    for entry in actions.batch_states(demo)["segments"][:3]:
        actions.approve(demo, entry["segment"], "approved for a kill test")
    _kill_step(demo, tmp_path, "export", "{dir}/roll.csv", seed=5)
