"""The app's data check screen and the sales tab's exclude and reinstate, driven by real key presses (Textual's
headless pilot); the database is then read through reval's own functions. No sleeps: every test awaits the
app's workers."""
from __future__ import annotations

import asyncio
from pathlib import Path
from typing import Any

import pytest
from helpers import PLANTED, settle, table_rows, type_text, write_check_project
from textual.pilot import Pilot
from textual.widgets import DataTable, Static

from reval.service import actions
from tui.app import RevalApp
from tui.screens.check import CheckScreen
from tui.screens.overview import OverviewScreen
from tui.screens.parcel import ParcelScreen
from tui.screens.segment import SegmentScreen

SIZE = (110, 34)


@pytest.fixture(scope="module")
def checked(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = write_check_project(tmp_path_factory.mktemp("tui-check") / "p")
    actions.import_data(folder)
    actions.prepare_sales(folder)
    return folder


def test_the_check_screen_lists_counts_per_segment_and_pages_a_segments_rows(checked: Path) -> None:
    asyncio.run(_check_screen(checked))


async def _check_screen(folder: Path) -> None:
    app = RevalApp(folder)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("d")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, CheckScreen)
        segments = table_rows(screen.query_one("#check-segments", DataTable))
        north = next(r for r in segments if r[0] == "north")
        total = actions.check_data(folder)["segments"]
        assert north[1:4] == ["23", "15", str(next(s["problems"] for s in total if s["segment"] == "north"))]
        rows = table_rows(screen.query_one("#check-rows", DataTable))
        assert {(r[0], r[2], r[3] or None) for r in rows} >= PLANTED         # north has problems: shown first
        assert screen.rows is not None and screen.rows["segment"] == "north" and screen.rows["pages"] == 1
        await pilot.press("t")                                                # one check at a time
        await settle(pilot)
        shown = table_rows(screen.query_one("#check-rows", DataTable))
        assert screen.code is not None and {r[2] for r in shown} == {screen.code}
        assert screen.code in str(screen.query_one("#check-rows-title", Static).render())
        first = shown[0][0]
        problem = screen.rows["rows"][0]["problem"] if screen.rows else ""
        assert len(problem) > 40 and problem in str(screen.query_one("#check-detail", Static).render())
        screen.query_one("#check-rows", DataTable).focus()
        await pilot.press("enter")                                            # the row's parcel
        await settle(pilot)
        assert isinstance(app.screen, ParcelScreen) and app.screen.parcel_id == first
        await pilot.press("escape")
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, OverviewScreen)


def test_the_sales_tab_excludes_and_reinstates_a_sale_with_its_events(demo_copy: Path) -> None:
    asyncio.run(_exclude_and_reinstate(demo_copy))


async def _open_sales_tab(pilot: Pilot[Any], segment: str) -> SegmentScreen:
    await pilot.press("slash")
    await type_text(pilot, segment)
    await pilot.press("enter", "enter")
    await settle(pilot)
    await pilot.press("5")
    await settle(pilot)
    screen = pilot.app.screen
    assert isinstance(screen, SegmentScreen) and screen.sales is not None
    return screen


async def _exclude_and_reinstate(folder: Path) -> None:
    segment = max(actions.segment_overview(folder), key=lambda s: s["n_sales"])["segment"]
    app = RevalApp(folder)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        screen = await _open_sales_tab(pilot, segment)
        assert screen.sales is not None
        sale = screen.sales["rows"][0]["sale_id"]
        await pilot.press("e")
        await pilot.press("enter")                     # a reason is required: the prompt stays
        assert app.screen.__class__.__name__ == "PromptScreen"
        await type_text(pilot, "sold between relatives")
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, SegmentScreen)
        first = table_rows(app.screen.query_one("#sales-table", DataTable))[0]
        assert first[0] == sale and first[-1].startswith("excluded by analyst: sold")
        excluded = actions.sales_report(folder)
        assert excluded["excluded_by_reason"].get("excluded by analyst: sold between relatives") == 1
        await pilot.press("i")                         # the highlighted row is the excluded sale
        await type_text(pilot, "checked the deed arms length")
        await pilot.press("enter")
        await settle(pilot)
        rows = table_rows(app.screen.query_one("#sales-table", DataTable))
        assert not any("excluded by analyst" in r[-1] for r in rows)
    events = [e for e in actions.event_log(folder)["events"] if e["kind"] in ("sale_exclude", "sale_include")]
    assert [(e["kind"], e["detail"]["sale_id"], e["detail"]["note"]) for e in events] == [
        ("sale_exclude", sale, "sold between relatives"), ("sale_include", sale, "checked the deed arms length")]
    assert not any(k.startswith("excluded by analyst") for k in actions.sales_report(folder)["excluded_by_reason"])
