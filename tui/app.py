"""The reval terminal app."""
from __future__ import annotations

from pathlib import Path

from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.widgets import DataTable, Footer, Header, Static

from reval import commands

CAUTION = ("Values are estimates for review by a qualified assessor; assessment level, caps, exemptions, "
           "notices and appeals follow local law.")


class RevalApp(App[None]):
    """Segments overview of one project folder."""

    TITLE = "reval"
    BINDINGS = [
        Binding("q", "quit", "Quit", id="quit"),
        Binding("j", "cursor_down", "Down", show=False, id="down"),
        Binding("k", "cursor_up", "Up", show=False, id="up"),
    ]

    def __init__(self, folder: Path) -> None:
        super().__init__()
        self.folder = folder

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static(CAUTION, id="caution")
        yield DataTable(id="segments", cursor_type="row", zebra_stripes=True)
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        table.add_columns("Segment", "Market area", "Parcels", "Sales")
        for row in commands.segment_overview(self.folder):
            table.add_row(row["segment"], row["market_area"], f"{row['n_parcels']:,}", f"{row['n_sales']:,}",
                          key=row["segment"])
        table.focus()

    def action_cursor_down(self) -> None:
        self.query_one(DataTable).action_cursor_down()

    def action_cursor_up(self) -> None:
        self.query_one(DataTable).action_cursor_up()


def run_app(folder: Path) -> None:
    """Open the app on a project folder."""
    RevalApp(folder).run()
