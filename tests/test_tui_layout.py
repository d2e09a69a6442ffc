"""The screens at 80x24 first, and using the room at 160x48 (issue 15's layout findings).

What a person sees is read from the rendered screen (the same text a terminal shows) and from the widgets'
sizes: a column is visible when it ends inside the table's width, a table needs no horizontal scrolling when
its content is no wider than the table.
"""
from __future__ import annotations

import asyncio
import io
from pathlib import Path

from helpers import pin_run_id, settle, table_rows, type_text
from rich.console import Console
from textual.widgets import DataTable

from tui.app import RevalApp
from tui.screens.parcel import ParcelScreen
from test_tui_snapshots import first_parcel


def screen_text(app: RevalApp) -> list[str]:
    """The screen's lines as a terminal shows them."""
    width, height = app.size
    console = Console(width=width, height=height, file=io.StringIO(), record=True, force_terminal=True)
    console.print(app.screen._compositor.render_update(full=True, screen_stack=app._background_screens))
    return console.export_text().splitlines()


def visible_columns(table: DataTable) -> list[str]:
    """The keys of the columns that end inside the table's visible width."""
    edge, shown = 0, []
    for key, column in table.columns.items():
        edge += column.get_render_width(table)
        if edge <= table.scrollable_content_region.width:
            shown.append(str(key.value))
    return shown


def test_overview_key_columns_fit_at_80_by_24(fitted_demo: Path) -> None:
    asyncio.run(_overview_key_columns_fit_at_80_by_24(fitted_demo))


async def _overview_key_columns_fit_at_80_by_24(fitted_demo: Path) -> None:
    # Findings: at 80x24 the overview cut off Sales, Parcels and Market area and showed 13 rows; the footer
    # ended in a bare `x`; "own (97%)" read as 97 % own when 97 % was borrowed.
    app = RevalApp(fitted_demo)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        table = app.screen.query_one("#segments", DataTable)
        assert {"segment", "market_area", "parcels", "sales", "median_ratio", "cod", "prd", "prb",
                "state"} <= set(visible_columns(table))
        assert table.size.height - 1 >= 16                        # rows of segments shown at once
        lines = screen_text(app)
        footer = lines[-1].rstrip()
        assert not footer.endswith(" x") and footer.endswith("Export")
        caution = [line for line in lines if "qualified assessor" in line]
        assert len(caution) == 1                                  # one line; the full text is in help
    app = RevalApp(fitted_demo)
    async with app.run_test(size=(160, 48)) as pilot:
        await settle(pilot)
        table = app.screen.query_one("#segments", DataTable)
        assert set(visible_columns(table)) == {str(k.value) for k in table.columns}   # every column at 160
        models = [r[-1] for r in table_rows(table)]
        assert any(m.endswith("% borrowed") for m in models) and not any("(" in m for m in models)
        assert table.size.height - 1 >= 22                        # every segment of the demo at once


def test_parcel_view_shows_features_and_contributions_at_80_by_24(demo_copy: Path) -> None:
    asyncio.run(_parcel_view_shows_features_and_contributions_at_80_by_24(demo_copy))


async def _parcel_view_shows_features_and_contributions_at_80_by_24(demo_copy: Path) -> None:
    # Finding: the parcel view cut off the features that explain the value (`living_are`). A real run id is
    # as long as a fit's clock makes it (the fixture's pinned one is short).
    pin_run_id(demo_copy / "reval.duckdb", "run-20261203-060732-811997")
    app = RevalApp(demo_copy)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("o")
        await type_text(pilot, first_parcel(demo_copy))
        await pilot.press("enter")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, ParcelScreen) and screen.data is not None
        for name in ("#parcel-value", "#parcel-features", "#parcel-parts"):
            table = screen.query_one(name, DataTable)
            assert table.virtual_size.width <= table.size.width, name     # no horizontal scrolling
            assert table.region.right <= 80, name
        text = "\n".join(screen_text(app))
        assert all(f["name"] in text for f in screen.data["features"])    # every feature's full name
