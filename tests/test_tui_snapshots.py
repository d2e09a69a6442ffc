"""Screenshots of the app compared with the accepted SVGs in __snapshots__ (pytest-textual-snapshot).

Deterministic by construction: fixed terminal sizes, the demo generator's fixed seed, the run id pinned
(see helpers.pin_run_id), no clock in the header, notifications off under the pilot. Each test first
asserts the state it expects, so a snapshot never silently records a broken screen.
Update after an intended change with `pytest tests/test_tui_snapshots.py --snapshot-update`, then look.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any

import duckdb
import pytest
from helpers import settle, type_text
from textual.pilot import Pilot
from textual.widgets import DataTable

from tui.app import RevalApp
from tui.screens.help import HelpScreen
from tui.screens.listing import ListScreen
from tui.screens.overview import OverviewScreen
from tui.screens.parcel import ParcelScreen
from tui.screens.segment import SegmentScreen
from tui.screens.steps import StepsScreen

THEMES = ("textual-dark", "textual-light")


def first_parcel(folder: Path) -> str:
    con = duckdb.connect(str(folder / "reval.duckdb"), read_only=True)
    try:
        return str(con.execute("SELECT min(parcel_id) FROM parcels").fetchone()[0])
    finally:
        con.close()


def themed(folder: Path, theme: str) -> RevalApp:
    app = RevalApp(folder)
    app.theme = theme
    return app


@pytest.mark.parametrize("theme", THEMES)
def test_overview_at_80_by_24(snap_compare: Any, fitted_demo: Path, theme: str) -> None:
    async def ready(pilot: Pilot[Any]) -> None:
        await settle(pilot)
        screen = pilot.app.screen
        assert isinstance(screen, OverviewScreen) and screen.query_one("#segments", DataTable).row_count > 0

    assert snap_compare(themed(fitted_demo, theme), terminal_size=(80, 24), run_before=ready)


@pytest.mark.parametrize("theme", THEMES)
def test_segment_drill_in_curves(snap_compare: Any, fitted_demo: Path, theme: str) -> None:
    async def ready(pilot: Pilot[Any]) -> None:
        await settle(pilot)
        await pilot.press("enter")
        await settle(pilot)
        screen = pilot.app.screen
        assert isinstance(screen, SegmentScreen) and screen.data is not None and screen.data["curves"]

    assert snap_compare(themed(fitted_demo, theme), terminal_size=(80, 24), run_before=ready)


@pytest.mark.parametrize("theme", THEMES)
def test_parcel_view(snap_compare: Any, fitted_demo: Path, theme: str) -> None:
    parcel_id = first_parcel(fitted_demo)

    async def ready(pilot: Pilot[Any]) -> None:
        await settle(pilot)
        await pilot.press("o")
        await type_text(pilot, parcel_id)
        await pilot.press("enter")
        await settle(pilot)
        screen = pilot.app.screen
        assert isinstance(screen, ParcelScreen) and screen.data is not None and screen.data["split"]

    assert snap_compare(themed(fitted_demo, theme), terminal_size=(80, 24), run_before=ready)


@pytest.mark.parametrize("theme", THEMES)
def test_help_at_80_by_24(snap_compare: Any, fitted_demo: Path, theme: str) -> None:
    async def ready(pilot: Pilot[Any]) -> None:
        await settle(pilot)
        await pilot.press("question_mark")
        assert isinstance(pilot.app.screen, HelpScreen)

    assert snap_compare(themed(fitted_demo, theme), terminal_size=(80, 24), run_before=ready)


@pytest.mark.parametrize("theme", THEMES)
def test_work_list_at_80_by_24(snap_compare: Any, fitted_demo: Path, theme: str) -> None:
    async def ready(pilot: Pilot[Any]) -> None:
        await settle(pilot)
        await pilot.press("C")
        await settle(pilot)
        screen = pilot.app.screen
        assert isinstance(screen, ListScreen) and screen.data is not None and screen.data["rows"]

    assert snap_compare(themed(fitted_demo, theme), terminal_size=(80, 24), run_before=ready)


@pytest.mark.parametrize("theme", THEMES)
def test_steps_at_80_by_24(snap_compare: Any, fitted_demo: Path, theme: str) -> None:
    async def ready(pilot: Pilot[Any]) -> None:
        await settle(pilot)
        await pilot.press("W")
        await settle(pilot)
        screen = pilot.app.screen
        assert isinstance(screen, StepsScreen) and len(screen.steps) == 6

    assert snap_compare(themed(fitted_demo, theme), terminal_size=(80, 24), run_before=ready)
