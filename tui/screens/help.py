"""Every key of the app, read from the one registry that also drives the footer."""
from __future__ import annotations

from rich.table import Table
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Header, Static

from .. import keys
from ..format import CAUTION, LEGEND
from .base import footer


def keys_table() -> Table:
    table = Table(box=None, expand=True, show_header=True, header_style="bold", pad_edge=False)
    table.add_column("Where", no_wrap=True)
    table.add_column("Keys", no_wrap=True)
    table.add_column("What it does", ratio=1)
    last = ""
    for scope, shown, description, _ in keys.help_rows():
        table.add_row(scope if scope != last else "", shown, description)
        last = scope
    return table


class HelpScreen(Screen[None]):
    """The keys, the marks' meaning and the caution, scrollable at any size."""

    CSS_PATH = "help.tcss"
    BINDINGS = keys.bindings("help")

    def compose(self) -> ComposeResult:
        yield Header()
        with VerticalScroll(id="help-body"):
            yield Static(keys_table(), id="help-keys")
            yield Static("Marks: " + LEGEND, id="help-legend")
            yield Static("Plots: ━ the segment's curve on its 95% band, ╍ its parent's (market area) curve, "
                         "▁▃▅ where the segment's parcels lie; ┄ the reference line (no effect, ratio 1.0); ⠶ sales. "
                         "Value change bars: █ unsold, ▓ sold parcels. Axes: curves in % of value against the "
                         "feature's own unit; ratios are value over time-adjusted price.",
                         id="help-plots")
            yield Static(CAUTION, id="help-caution")
        yield footer()

    def on_mount(self) -> None:
        self.query_one("#help-body").focus()

    def action_close(self) -> None:
        self.dismiss()
