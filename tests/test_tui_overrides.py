"""Overrides from the app's parcel view (issue 12, item 4): e asks for value, reason and note in the prompt and
sets the override; u asks for a note and removes it; both are events, and a bad reason is reported, not fatal."""
from __future__ import annotations

import asyncio
from pathlib import Path

from helpers import query_frame, settle, type_text

from reval.service import actions
from tui.app import RevalApp
from tui.screens.parcel import ParcelScreen
from tui.screens.prompt import PromptScreen

SIZE = (100, 32)


def _parcel(folder: Path) -> str:
    return str(query_frame(folder, "SELECT parcel_id FROM parcels ORDER BY parcel_id LIMIT 1 OFFSET 3")["parcel_id"][0])


def test_the_parcel_view_sets_and_removes_an_override(demo_copy: Path) -> None:
    asyncio.run(_sets_and_removes(demo_copy))


async def _sets_and_removes(folder: Path) -> None:
    parcel = _parcel(folder)
    app = RevalApp(folder)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("o")
        await type_text(pilot, parcel)
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, ParcelScreen)
        await pilot.press("e")
        assert isinstance(app.screen, PromptScreen) and "appeal_decision" in app.screen.detail
        await type_text(pilot, "123456 hunch owner says so")
        await pilot.press("enter")
        await settle(pilot)
        assert app.messages[-1][0] == "error" and "Unknown override reason 'hunch'" in app.messages[-1][1]
        assert query_frame(folder, "SELECT count(*) AS n FROM overrides")["n"][0] == 0
        await pilot.press("e")
        await type_text(pilot, "123,456 appeal_decision board decision 14")
        await pilot.press("enter")
        await settle(pilot)
        assert f"Parcel {parcel} overridden at 123,456" in app.messages[-1][1]
        screen = app.screen
        assert isinstance(screen, ParcelScreen) and screen.data is not None
        assert screen.data["override"] is not None and screen.data["override"]["value"] == 123456
        await pilot.press("u")
        await type_text(pilot, "decision reversed")
        await pilot.press("enter")
        await settle(pilot)
        assert f"Override of parcel {parcel} removed" in app.messages[-1][1]
    assert query_frame(folder, "SELECT count(*) AS n FROM overrides")["n"][0] == 0
    events = [e for e in actions.event_log(folder)["events"] if e["kind"].startswith("override_")]
    assert [(e["kind"], e["detail"]["note"]) for e in events] == [("override_set", "board decision 14"),
                                                                  ("override_removed", "decision reversed")]
