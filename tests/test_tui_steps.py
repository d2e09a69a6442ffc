"""Every step of the job from the app (issue 15): a project folder with only its config and input files opens
on the steps screen, which says what to do next, and the keys take it to an exported roll through the same
service actions (and checks and messages) as the command line."""
from __future__ import annotations

import asyncio
import json
from pathlib import Path

from helpers import query_frame, settle
from test_tui import SIZE, _confirm_text, go_to
from textual.widgets import Static

from data_samples.demo_town import write_project
from reval.service import actions, views
from tui.app import RevalApp
from tui.screens.overview import OverviewScreen
from tui.screens.steps import StepsScreen


def test_from_input_files_to_an_exported_roll_by_keys(tmp_path: Path) -> None:
    folder = tmp_path / "town"
    write_project(folder, n_parcels=2000)
    config = folder / "reval.toml"
    config.write_text(config.read_text(encoding="utf-8").replace("\n[model]\n", "\n[model]\nfolds = 3\n"),
                      encoding="utf-8")
    asyncio.run(_from_input_files_to_an_exported_roll_by_keys(folder))


async def _from_input_files_to_an_exported_roll_by_keys(folder: Path) -> None:
    # Finding: the import, sales and study steps were not in the app; an empty project sat on "Reading the
    # project…".
    app = RevalApp(folder)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, StepsScreen)
        assert str(screen.query_one("#steps-next", Static).render()).startswith("Next: press i to check and load")
        await pilot.press("i")
        await settle(pilot)
        assert app.messages[-1][1].startswith("Imported 2,000 parcels")
        await pilot.press("u")
        await settle(pilot)
        assert app.messages[-1][1].startswith("Sales: ") and "excluded" in app.messages[-1][1]
        await pilot.press("t")
        await settle(pilot)
        assert app.messages[-1][1].startswith("Ratio study of prior")
        await pilot.press("f", "enter")
        await settle(pilot)
        assert app.messages[-1][1].startswith("Fit done")
        await pilot.press("t")                       # after the fit: the out-of-fold study the gate judges by
        await settle(pilot)
        assert app.messages[-1][1].startswith("Ratio study of out-of-fold")
        await pilot.press("v")
        await settle(pilot)
        assert "to stage" in _confirm_text(app)
        await pilot.press("enter")
        await settle(pilot)
        assert app.messages[-1][1].startswith("Values of run")
        assert str(screen.query_one("#steps-next", Static).render()).startswith("Next: press x")
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, OverviewScreen)
        segments = views.overview(folder)["segments"]
        held = segments[0]["segment"]
        await go_to(pilot, held)
        await pilot.press("h", "t", "h", "i", "n", "enter")
        await settle(pilot)
        await pilot.press("c")
        approved = segments[1]["segment"]
        await go_to(pilot, approved)
        await pilot.press("a", "o", "k", "enter")
        await settle(pilot)
        await pilot.press("x", "tab", "space", "enter")
        await settle(pilot)
        assert app.messages[-1][0] == "information", app.messages[-1]
    states = {s["segment"]: s for s in actions.batch_states(folder)["segments"]}
    assert states[held]["open"]["state"] == "held" and states[approved]["certified"]["state"] == "exported"
    manifest = json.loads((folder / "value_roll.manifest.json").read_text(encoding="utf-8"))
    assert manifest["partial"] is True and held in manifest["not_approved"]
    assert query_frame(folder, "SELECT count(*) AS n FROM runs")["n"].iloc[0] == 1
