"""Names are data: a neighbourhood name from a file is printed as written, never read as rich markup or
sent to the terminal as an escape sequence, and a long one is cut with an ellipsis in tables (CLI and app)."""
from __future__ import annotations

import asyncio
from pathlib import Path

import pytest
from helpers import SMALL_PARCELS, SMALL_SALES, run_reval, settle, table_rows, write_project
from textual.widgets import DataTable, Static

from reval.service import actions
from reval.service.wording import ELLIPSIS, NAME_WIDTH, shown
from tui.app import RevalApp

TITLE = "\x1b]0;pwned\x07TAML"                 # sets the terminal title when printed raw
BROKEN = "[bold red]MIRB[/] [/link]"            # rich raised MarkupError on the closing tag
SWALLOWED = "[bold red]MIRB [east]"             # rich showed "MIRB"
LONG = "W" * 10_000                             # pushed every other column off the overview


@pytest.fixture
def named(tmp_path: Path) -> Path:
    """The small township with hostile names for its segments and a market area."""
    parcels = (SMALL_PARCELS.replace("north,A", f'"{TITLE}",A').replace("south,A", f'"{BROKEN}",A')
               .replace("east,B", f'"{SWALLOWED}",{LONG}'))
    folder = write_project(tmp_path / "p", parcels=parcels, sales=SMALL_SALES)
    actions.import_data(folder)
    return folder


@pytest.mark.parametrize("text,expected", [
    (TITLE, "]0;pwnedTAML"), ("a\tb\nc\r", "a b c "), ("\x9b2J\x7f\u202eabc", "2Jabc"), (BROKEN, BROKEN),
    ("x" * 50, "x" * (NAME_WIDTH - 1) + ELLIPSIS), ("日本" * 30, "日本" * 9 + "日" + ELLIPSIS),
])
def test_shown_removes_control_characters_and_cuts_long_names(text: str, expected: str) -> None:
    assert shown(text, NAME_WIDTH) == expected


def test_the_cli_prints_names_as_written(named: Path) -> None:
    """Issue findings: escape sequences in a name changed the terminal's title; `reval sales` committed and
    then crashed on the markup of a name; another name showed as "MIRB"."""
    done = run_reval("sales", "--project", str(named), columns=200)
    assert done.returncode == 0 and "Traceback" not in done.stderr, done.stderr
    assert "\x1b" not in done.stdout and "\x07" not in done.stdout
    assert "]0;pwnedTAML" in done.stdout and BROKEN in done.stdout and SWALLOWED in done.stdout
    done = run_reval("approve", SWALLOWED, "--project", str(named))   # a refusal naming the segment
    assert done.returncode == 1 and SWALLOWED in done.stderr and "Traceback" not in done.stderr
    done = run_reval("approve", TITLE, "--project", str(named))
    assert done.returncode == 1 and "\x1b" not in done.stderr and "]0;pwnedTAML" in done.stderr


def test_the_app_starts_and_shows_names_as_written(named: Path) -> None:
    """Issue findings: the app crashed at start on a markup name; a 10 kB name pushed every other column
    off the overview."""
    actions.prepare_sales(named)
    asyncio.run(_app_shows_names(named))


async def _app_shows_names(folder: Path) -> None:
    app = RevalApp(folder)
    async with app.run_test(size=(120, 30)) as pilot:
        await settle(pilot)
        rows = table_rows(app.screen.query_one("#segments", DataTable))
        names = {r[0] for r in rows}
        assert {"]0;pwnedTAML", BROKEN, SWALLOWED} == names
        area = next(r[1] for r in rows if r[0] == SWALLOWED)
        assert area == "W" * (NAME_WIDTH - 1) + ELLIPSIS
        assert not any("\x1b" in cell or "\x07" in cell for row in rows for cell in row)
        app.open_segment(BROKEN)
        await settle(pilot)
        title = str(app.screen.query_one("#segment-title", Static).render())
        assert title.startswith(f"Segment {BROKEN} · market area A")
