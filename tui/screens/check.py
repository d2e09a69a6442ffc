"""The data check: problems per segment to work through before fitting, and one segment's rows, a page at a time.

The counts come from the whole check (reval.service.actions.check_data); the rows of the highlighted segment are
read a page at a time, built for that segment alone and filtered by check in SQL (reval.service.views.check_rows).
"""
from __future__ import annotations

from typing import Any

from textual import on
from textual.app import ComposeResult
from textual.widgets import DataTable, Header, Static

from reval.service import actions, views
from reval.service.types import CheckPage, CheckReport

from .. import keys
from ..format import cells
from ..jobs import Loaded, StatusBar
from ..plain import Plain
from .base import DataScreen, footer

ROWS_PAGE = 50


class CheckScreen(DataScreen):
    """Counts per segment and check above; below, the highlighted segment's problems (one check at a time with t)."""

    CSS_PATH = "check.tcss"
    BINDINGS = keys.bindings("check")

    def __init__(self) -> None:
        super().__init__()
        self.report: CheckReport | None = None
        self.rows: CheckPage | None = None
        self.segment: str | None = None
        self.code: str | None = None
        self.page = 0

    def compose(self) -> ComposeResult:
        yield Header()
        yield Plain("Data check: reading…", id="check-title")
        yield DataTable(id="check-segments", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="check-rows-title")
        yield DataTable(id="check-rows", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="check-detail")
        yield Plain("", id="check-not-run")
        yield StatusBar()
        yield footer()

    def on_mount(self) -> None:
        self.query_one("#check-segments", DataTable).focus()
        self.reload()

    def reload(self) -> None:
        self.fetch("report", actions.check_data, self.reval.folder)
        if self.segment is not None:
            self.fetch_rows()

    def fetch_rows(self) -> None:
        self.fetch("rows", views.check_rows, self.reval.folder, self.page, ROWS_PAGE, self.segment, self.code)

    def on_load_failed(self, message: Any) -> None:
        self.query_one("#check-title", Static).update(f"✗ {message.error}")
        super().on_load_failed(message)

    @on(Loaded)
    def loaded(self, message: Loaded) -> None:
        if message.tag == "report":
            self.show_report(message.data)
        elif message.tag == "rows":
            self.show_rows(message.data)

    def show_report(self, r: CheckReport) -> None:
        self.report = r
        total = sum(r["totals"].values())
        self.query_one("#check-title", Static).update(
            f"Data check before fitting: {total:,} problems in {sum(1 for s in r['segments'] if s['problems'])} of "
            f"{len(r['segments'])} segments · sold ranges from the {r['basis']} · every row: reval check --csv FILE")
        table = self.query_one("#check-segments", DataTable)
        table.clear(columns=True)
        table.add_columns("Segment", "Parcels", "Sold", "Problems", "By check")
        for s in r["segments"]:
            by_check = ", ".join(f"{code} {n:,}" for code, n in sorted(s["counts"].items(), key=lambda kv: -kv[1]))
            table.add_row(*cells(s["segment"], f"{s['parcels']:,}", f"{s['sold_parcels']:,}", f"{s['problems']:,}",
                                 by_check), key=s["segment"])
        self.query_one("#check-not-run", Static).update(
            "\n".join(f"Not run: {n['check']}: {n['reason']}." for n in r["not_run"]))
        if self.segment is None and r["segments"]:
            first = next((i for i, s in enumerate(r["segments"]) if s["problems"]), 0)
            table.move_cursor(row=first)
            self.choose(r["segments"][first]["segment"])

    @on(DataTable.RowHighlighted, "#check-segments")
    def segment_highlighted(self, event: DataTable.RowHighlighted) -> None:
        if event.row_key.value is not None and event.row_key.value != self.segment:
            self.choose(str(event.row_key.value))

    def choose(self, segment: str) -> None:
        self.segment, self.code, self.page = segment, None, 0
        self.fetch_rows()

    def show_rows(self, p: CheckPage) -> None:
        self.rows, self.page = p, p["page"]
        which = f" · check {p['code']} (t: next)" if p["code"] else " · all checks (t: one at a time)"
        self.query_one("#check-rows-title", Static).update(
            f"Segment {p['segment']}: {p['total']:,} problems{which} · page {p['page'] + 1}/{p['pages']} (] [) · "
            "Enter: parcel")
        table = self.query_one("#check-rows", DataTable)
        table.clear(columns=True)
        table.add_columns("Parcel", "Sale", "Check", "Feature", "Value", "Problem")
        for r in p["rows"]:
            table.add_row(*cells(r["parcel_id"], r["sale_id"] or "", r["code"], r["feature"] or "", r["value"] or "",
                                 r["problem"]))

    @on(DataTable.RowHighlighted, "#check-rows")
    def row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        """The highlighted row's problem in full (the table cuts long text)."""
        if self.rows and 0 <= event.cursor_row < len(self.rows["rows"]):
            r = self.rows["rows"][event.cursor_row]
            where = " · ".join(x for x in (f"parcel {r['parcel_id']}", r["sale_id"] and f"sale {r['sale_id']}",
                                           r["feature"]) if x)
            self.query_one("#check-detail", Static).update(f"{where} · {r['code']}: {r['problem']}")

    def action_page(self, step: int) -> None:
        if self.rows is not None:
            page = min(max(self.page + step, 0), self.rows["pages"] - 1)
            if page != self.page:
                self.page = page
                self.fetch_rows()

    def action_cycle_check(self) -> None:
        """Show the segment's rows of one check at a time, in the checks' order, then all again."""
        if self.report is None or self.segment is None:
            return
        counts = next((s["counts"] for s in self.report["segments"] if s["segment"] == self.segment), {})
        present = [code for code in self.report["checks"] if code in counts]
        options: list[str | None] = [None, *present]
        self.code = options[(options.index(self.code) + 1) % len(options)] if self.code in options else None
        self.page = 0
        self.fetch_rows()

    @on(DataTable.RowSelected, "#check-segments")
    def segment_chosen(self) -> None:
        self.query_one("#check-rows", DataTable).focus()

    @on(DataTable.RowSelected, "#check-rows")
    def row_chosen(self) -> None:
        self.action_open_parcel()

    def action_open_parcel(self) -> None:
        table = self.query_one("#check-rows", DataTable)
        if self.rows and self.rows["rows"] and table.has_focus:
            self.reval.open_parcel(self.rows["rows"][table.cursor_row]["parcel_id"])

    def action_back(self) -> None:
        self.dismiss()
