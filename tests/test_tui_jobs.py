"""Work continues during jobs and decisions are refused before a note is typed (issue 15's findings).

Each test drives the app with real key presses (Textual's pilot) on a copy of the small demo, and checks the
database through reval's own functions afterwards.
"""
from __future__ import annotations

import asyncio
import threading
import time
from pathlib import Path

import pytest
from helpers import held_by_child, query_frame, settle, table_rows, type_text
from test_tui import SIZE, _confirm_text, failing_and_passing, go_to, states
from textual.widgets import Input

from reval.service import actions
from reval.service.project import open_project
from tui.app import RevalApp
from tui.jobs import JobProgressed
from tui.outcomes import job_fraction
from tui.screens.overview import OverviewScreen
from tui.screens.prompt import ConfirmScreen, ExportScreen, PromptScreen
from tui.screens.segment import SegmentScreen


def quick_fit(folder: Path) -> None:
    """Three folds instead of the config's: the fit still takes long enough to act during it."""
    config = folder / "reval.toml"
    text = config.read_text(encoding="utf-8")
    config.write_text(text.replace("\n[model]\n", "\n[model]\nfolds = 3\n"), encoding="utf-8")


def test_work_goes_on_during_a_fit(demo_copy: Path) -> None:
    asyncio.run(_work_goes_on_during_a_fit(demo_copy))


async def _work_goes_on_during_a_fit(demo_copy: Path) -> None:
    # Findings: a segment opened only after the fit ended; approve/hold took a typed note and then refused;
    # cancel (Ctrl+K) was not shown; q quit without a warning; f started with one key press; the progress bar
    # restarted at each phase.
    quick_fit(demo_copy)
    progress: list[JobProgressed] = []

    def hook(message: object) -> None:
        if isinstance(message, JobProgressed):
            progress.append(message)

    app = RevalApp(demo_copy)
    async with app.run_test(size=SIZE, message_hook=hook) as pilot:
        await settle(pilot)
        assert "ctrl+k" not in app.screen.active_bindings          # no job: no cancel key in the footer
        await pilot.press("f")
        assert isinstance(app.screen, ConfirmScreen) and not app.job_running   # f asks first
        assert "new run" in _confirm_text(app)
        await pilot.press("enter")
        assert app.job_running and "ctrl+k" in app.screen.active_bindings
        assert "Ctrl+K cancels" in app.status.text
        await pilot.press("h")                                       # refused before any note is asked
        assert not isinstance(app.screen, PromptScreen)
        assert app.messages[-1][0] == "warning" and "Hold of" in app.messages[-1][1]
        await pilot.press("q")                                       # quitting asks while a job runs
        assert isinstance(app.screen, ConfirmScreen) and "Quit while a job runs" in app.screen.title_text
        await pilot.press("escape")
        await settle(pilot)
        assert app.is_running and app.messages[-1][1].startswith("Fit done")
        assert "ctrl+k" not in app.screen.active_bindings
    assert query_frame(demo_copy, "SELECT count(*) AS n FROM runs")["n"].iloc[0] == 2
    # one bar over the whole job: it never goes back at a new phase, and ends full
    fractions = [job_fraction(p.kind, p.step, p.done, p.total) for p in progress]
    assert len({p.step for p in progress}) == 3
    assert fractions == sorted(fractions) and fractions[-1] == 1.0


def test_a_decision_on_an_approved_batch_says_revoke_first(demo_copy: Path) -> None:
    asyncio.run(_a_decision_on_an_approved_batch_says_revoke_first(demo_copy))


async def _a_decision_on_an_approved_batch_says_revoke_first(demo_copy: Path) -> None:
    # Finding: approve or hold on an already-approved batch opened the note dialog, took the note, then said
    # there was no staged batch.
    _, passing = failing_and_passing(demo_copy)
    actions.approve(demo_copy, passing)
    app = RevalApp(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await go_to(pilot, passing)
        for key in ("h", "a"):
            await pilot.press(key)
            await settle(pilot)
            prompt = app.screen                       # the refusal shows in the dialog before a note is typed
            assert isinstance(prompt, PromptScreen) and prompt.refused is not None
            assert "already approved" in prompt.refused and prompt.query_one("#prompt-input").disabled
            severity, text = app.messages[-1]
            assert severity == "error" and "already approved" in text and "revoke" in text
            await pilot.press("o", "k", "enter")      # typed ahead: stays in the dialog, Enter closes it
            await settle(pilot)
            assert isinstance(app.screen, OverviewScreen) and app.messages[-1][1] == text
    assert states(demo_copy)[passing]["certified"]["state"] == "approved"


def test_export_messages_name_the_checkbox_and_ask_before_replacing(demo_copy: Path) -> None:
    asyncio.run(_export_messages_name_the_checkbox_and_ask_before_replacing(demo_copy))


async def _export_messages_name_the_checkbox_and_ask_before_replacing(demo_copy: Path) -> None:
    # Findings: messages cited `--partial`; Enter on the export dialog's checkbox toggled it instead of
    # exporting; an export overwrote an existing roll silently.
    _, passing = failing_and_passing(demo_copy)
    actions.approve(demo_copy, passing)
    roll = demo_copy / "value_roll.csv"
    app = RevalApp(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("x", "enter")                  # a full export is refused: in the app's words
        await settle(pilot)
        severity, text = app.messages[-1]
        assert severity == "error" and "Partial export" in text and "--partial" not in text
        await pilot.press("x", "tab", "space", "enter")  # Enter on the ticked checkbox exports
        await settle(pilot)
        assert not isinstance(app.screen, ExportScreen) and roll.exists()
        first = roll.read_bytes()
        roll.write_text("kept\n", encoding="utf-8")
        await pilot.press("x", "tab", "space", "enter")  # the roll exists: asked first, Esc keeps it
        await settle(pilot)
        assert isinstance(app.screen, ConfirmScreen) and str(roll) in _confirm_text(app)
        await pilot.press("escape")
        await settle(pilot)
        assert roll.read_text(encoding="utf-8") == "kept\n"
        await pilot.press("x", "tab", "space", "enter", "enter")   # Enter replaces it
        await settle(pilot)
        assert app.messages[-1][0] == "information", app.messages[-1]
    assert roll.read_bytes() == first


def test_typed_ahead_note_never_reaches_the_overview(demo_copy: Path) -> None:
    asyncio.run(_typed_ahead_note_never_reaches_the_overview(demo_copy))


async def _typed_ahead_note_never_reaches_the_overview(demo_copy: Path) -> None:
    # The refusal is decided before the dialog opens, so a note typed at once lands in the dialog.
    failing, _ = failing_and_passing(demo_copy)
    app = RevalApp(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await go_to(pilot, failing)
        await pilot.press("h")
        await type_text(pilot, "check the lots")
        assert isinstance(app.screen, PromptScreen)
        await pilot.press("enter")
        await settle(pilot)
    assert states(demo_copy)[failing]["open"]["note"] == "check the lots"
    assert all(not isinstance(s, SegmentScreen) for s in app.screen_stack)


def test_a_decision_made_elsewhere_shows_without_refresh(demo_copy: Path) -> None:
    asyncio.run(_a_decision_made_elsewhere_shows_without_refresh(demo_copy))


async def _a_decision_made_elsewhere_shows_without_refresh(demo_copy: Path) -> None:
    # Finding: two app instances on one project did not see each other's decisions until Ctrl+R. The app reads
    # the newest event id every few seconds (here every 0.2 s) and reloads when it grew.
    failing, _ = failing_and_passing(demo_copy)
    app = RevalApp(demo_copy)
    app.poll_seconds = 0.2
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await go_to(pilot, failing)
        actions.hold(demo_copy, failing, "held from the other window")   # as another process would
        shown = ""
        for _ in range(100):
            await pilot.pause(0.05)
            await settle(pilot)
            rows = {r[0]: r for r in table_rows(app.screen.query_one("#segments"))}
            shown = rows[failing][8]
            if shown.startswith("held"):
                break
        assert shown == "held, run 1"


def test_a_segment_opens_while_a_job_holds_the_database(demo_copy: Path) -> None:
    asyncio.run(_a_segment_opens_while_a_job_holds_the_database(demo_copy))


async def _a_segment_opens_while_a_job_holds_the_database(demo_copy: Path) -> None:
    # Finding: while a fit ran, a segment opened only after the fit ended. A job that holds the project open
    # for writing until the test lets it go stands in for a long fit, so the check does not race the clock.
    release = threading.Event()

    def hold_open(folder: Path) -> str:
        with open_project(folder, write=True):
            release.wait(120)
        return "done"

    app = RevalApp(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        app.start_job("fit", "Holding the project", hold_open, demo_copy, describe=str)
        await pilot.press("enter")
        loaded = False
        for _ in range(1500):
            screen = app.screen
            if isinstance(screen, SegmentScreen) and screen.data is not None:
                loaded = True
                break
            await pilot.pause(0.02)
        still_running = app.job_running
        release.set()
        await settle(pilot)
    assert loaded and still_running


def test_the_check_before_a_note_does_not_block_the_app(demo_copy: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("REVAL_WAIT", "4")
    _, passing = failing_and_passing(demo_copy)
    asyncio.run(_the_check_before_a_note_does_not_block_the_app(demo_copy, passing))


async def _the_check_before_a_note_does_not_block_the_app(folder: Path, segment: str) -> None:
    # Finding: the check before a decision's note read the database in the UI thread, so with another process
    # writing the app froze for REVAL_WAIT seconds. Now it runs in a worker: keys are handled at once.
    app = RevalApp(folder)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await go_to(pilot, segment)
        with held_by_child(folder, write=True):       # another process writes: a read waits REVAL_WAIT for it
            started = time.monotonic()
            await pilot.press("a")
            await type_text(pilot, "looks fine")
            assert time.monotonic() - started < 2.0   # REVAL_WAIT is 4 s: nothing waited for it
            prompt = app.screen
            assert isinstance(prompt, PromptScreen)
            assert prompt.query_one("#prompt-input", Input).value == "looks fine"
            await settle(pilot)                       # the check gives up after REVAL_WAIT, naming the holder
        assert prompt.refused is not None and "reval fit" in prompt.refused, prompt.refused
        assert app.messages[-1][0] == "error"
