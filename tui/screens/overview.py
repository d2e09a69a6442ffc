"""The segments overview: one row per segment, sortable, filterable and searchable, keyboard first."""
from __future__ import annotations

from typing import Any

from rich.cells import cell_len
from rich.style import Style
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.reactive import reactive
from textual.widgets import DataTable, Header, Input, Static

from reval.service import views
from reval.service.types import Overview, OverviewRow

from .. import keys
from ..format import SHORT_CAUTION, SHORT_LEGEND, cells, gate_detail, model_cell, percent, shown, stat_cell
from ..jobs import Loaded, StatusBar
from ..plain import Plain
from .base import DataScreen, footer

# (sort key, header label, cells it may take at 80 columns): the key columns first, so that at 80x24 the
# segment, its market area, counts, statistics and state fit; change and model follow to the right (and show
# at 160 columns).
COLUMNS = (("segment", "Name", 8), ("market_area", "Area", 8), ("parcels", "Parcels", 7), ("sales", "Sales", 5),
           ("median_ratio", "Median", 6), ("cod", "COD", 5), ("prd", "PRD", 6), ("prb", "PRB", 7),
           ("state", "State", 13), ("value_change", "Change", 7), ("model", "Model", 22))
WIDE = 120   # from this many columns, names and states are not cut
SORT_ORDER = tuple(key for key, _, _ in COLUMNS)
LABELS = {key: label for key, label, _ in COLUMNS}
VERDICT_COLOURS = {"pass": "text-success", "fail": "text-error", "inconclusive": "text-warning",
                   "too_few_sales": "text-warning"}


class OverviewScreen(DataScreen):
    """Every segment with its model, ratio statistics (pass/fail marked), value change and batch state."""

    CSS_PATH = "overview.tcss"
    BINDINGS = keys.bindings("overview")

    sort_key: reactive[str] = reactive("segment")
    descending: reactive[bool] = reactive(False)
    failing_only: reactive[bool] = reactive(False)
    area: reactive[str | None] = reactive(None)
    state: reactive[str | None] = reactive(None)
    search_text: reactive[str] = reactive("")

    def __init__(self) -> None:
        super().__init__()
        self.data: Overview | None = None
        self.shown: list[OverviewRow] = []

    def compose(self) -> ComposeResult:
        yield Header()
        yield Plain("Reading the project…", id="stats-header")
        yield Plain("", id="filters")
        yield Static(SHORT_LEGEND, id="legend")
        yield DataTable(id="segments", cursor_type="row", zebra_stripes=True)
        yield Input(placeholder="segment name (Enter keeps it, Esc clears it)", id="search")
        yield Static(SHORT_CAUTION, id="caution")
        yield StatusBar()
        yield footer()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        table.focus()
        self.app.theme_changed_signal.subscribe(self, lambda _: self.refresh_table())
        self.reload()

    def reload(self) -> None:
        self.fetch("overview", self.reval.overview_data)

    @on(Loaded)
    def show_data(self, message: Loaded) -> None:
        if message.tag != "overview":
            return
        self.data = message.data
        self.app.title = shown(self.data["jurisdiction"], 80)
        self.app.sub_title = f"valuation date {self.data['valuation_date']}"
        run = self.data["run_id"]
        hint = "" if run else " · no model run yet — press f to fit"
        self.query_one("#stats-header", Static).update(self.data["stats_header"] + hint)
        self.refresh_table()

    # ---- the table ---------------------------------------------------------------------------------------

    def current_segment(self) -> str | None:
        table = self.query_one(DataTable)
        if not self.shown or table.cursor_row >= len(self.shown):
            return None
        return str(self.shown[table.cursor_row]["segment"])

    def refresh_table(self) -> None:
        if self.data is None:
            return
        keep = self.current_segment()
        rows = views.filter_segments(self.data["segments"], failing_only=self.failing_only,
                                           market_area=self.area, state=self.state, text=self.search_text)
        self.shown = views.sort_segments(rows, self.sort_key, self.descending)
        table = self.query_one(DataTable)
        colours = self.app.theme_variables
        body = [cells(*self._cells(row, colours)) for row in self.shown]
        # fixed widths measured here: DataTable's own measuring can be lost when it is refilled twice in a tick
        table.clear(columns=True)
        for i, (key, label, _) in enumerate(COLUMNS):
            # the sort shows on the line above the table (a mark in the header would widen a column at 80x24)
            width = max([cell_len(label), *(cell_len(str(r[i])) for r in body)])
            table.add_column(label, key=key, width=width)
        for row, values in zip(self.shown, body):
            table.add_row(*values, key=row["segment"])
        if keep is not None and any(r["segment"] == keep for r in self.shown):
            table.move_cursor(row=table.get_row_index(keep))
        self._show_filters()

    def _cells(self, row: OverviewRow, colours: dict[str, str]) -> list[Any]:
        def verdict(stat: str) -> Text:
            status = row["stats"][stat]["status"]
            colour = colours.get(VERDICT_COLOURS.get(status or "", ""), None)
            return Text(stat_cell(row["stats"][stat], stat, short=True), style=Style(color=colour) if colour else "")

        wide = self.size.width >= WIDE
        widths = {key: (None if wide else width) for key, _, width in COLUMNS}
        return [shown(row["segment"], widths["segment"]), shown(row["market_area"], widths["market_area"]),
                f"{row['parcels']:,}", f"{row['sales']:,}", verdict("median_ratio"), verdict("cod"), verdict("prd"),
                verdict("prb"), shown(row["batches"], widths["state"]), percent(row["value_change"]),
                model_cell(row)]

    def on_resize(self) -> None:
        """Names and states are cut below WIDE columns: redraw when the width crosses it."""
        wide = self.size.width >= WIDE
        if wide != getattr(self, "_wide", None):
            self._wide = wide
            self.refresh_table()

    def _show_filters(self) -> None:
        assert self.data is not None
        parts = [f"{len(self.shown)} of {len(self.data['segments'])} segments",
                 f"by {LABELS[self.sort_key]} {'▼' if self.descending else '▲'}"]
        active = [name for name, on_ in (("cannot be approved", self.failing_only),
                                         (f"market area {self.area}", self.area is not None),
                                         (f"state {self.state}", self.state is not None),
                                         (f"name contains '{self.search_text}'", bool(self.search_text))) if on_]
        parts.append("filters: " + (", ".join(active) if active else "none"))
        self.query_one("#filters", Static).update(" · ".join(parts))

    def watch_sort_key(self) -> None:
        self.refresh_table()

    def watch_descending(self) -> None:
        self.refresh_table()

    def watch_failing_only(self) -> None:
        self.refresh_table()

    def watch_area(self) -> None:
        self.refresh_table()

    def watch_state(self) -> None:
        self.refresh_table()

    def watch_search_text(self) -> None:
        self.refresh_table()

    # ---- actions -----------------------------------------------------------------------------------------

    def action_cursor_down(self) -> None:
        self.query_one(DataTable).action_cursor_down()

    def action_cursor_up(self) -> None:
        self.query_one(DataTable).action_cursor_up()

    def action_cursor_top(self) -> None:
        self.query_one(DataTable).move_cursor(row=0)

    def action_cursor_bottom(self) -> None:
        self.query_one(DataTable).move_cursor(row=max(len(self.shown) - 1, 0))

    def action_open_segment(self) -> None:
        segment = self.current_segment()
        if segment is not None:
            self.reval.open_segment(segment)

    def action_open_check(self) -> None:
        from .check import CheckScreen  # loads when first opened, like the drill-ins

        self.app.push_screen(CheckScreen())

    @on(DataTable.RowSelected)
    def row_chosen(self) -> None:
        self.action_open_segment()

    @on(DataTable.HeaderSelected)
    def header_chosen(self, event: DataTable.HeaderSelected) -> None:
        key = str(event.column_key.value)
        if key == self.sort_key:
            self.descending = not self.descending
        else:
            self.sort_key = key

    def action_sort_next(self) -> None:
        self.sort_key = SORT_ORDER[(SORT_ORDER.index(self.sort_key) + 1) % len(SORT_ORDER)]

    def action_sort_previous(self) -> None:
        self.sort_key = SORT_ORDER[(SORT_ORDER.index(self.sort_key) - 1) % len(SORT_ORDER)]

    def action_sort_reverse(self) -> None:
        self.descending = not self.descending

    def action_toggle_failing(self) -> None:
        self.failing_only = not self.failing_only

    def _cycle(self, current: str | None, options: list[str]) -> str | None:
        choices: list[str | None] = [None, *options]
        return choices[(choices.index(current) + 1) % len(choices)] if current in choices else None

    def action_cycle_area(self) -> None:
        if self.data:
            self.area = self._cycle(self.area, self.data["market_areas"])

    def action_cycle_state(self) -> None:
        if self.data:
            self.state = self._cycle(self.state, [*self.data["states"], "none"])

    def action_search(self) -> None:
        search = self.query_one("#search", Input)
        search.add_class("-open")
        search.focus()

    @on(Input.Changed, "#search")
    def search_typed(self, event: Input.Changed) -> None:
        self.search_text = event.value

    @on(Input.Submitted, "#search")
    def search_done(self) -> None:
        self.query_one(DataTable).focus()

    def key_escape(self) -> None:
        search = self.query_one("#search", Input)
        if search.has_focus:
            search.value = ""
            search.remove_class("-open")
            self.query_one(DataTable).focus()

    def action_clear_filters(self) -> None:
        search = self.query_one("#search", Input)
        search.value = ""
        search.remove_class("-open")
        self.failing_only, self.area, self.state, self.search_text = False, None, None, ""

    def action_approve(self) -> None:
        self._decide("approve")

    def action_hold(self) -> None:
        self._decide("hold")

    def action_revoke(self) -> None:
        self._decide("revoke")

    def _decide(self, kind: str) -> None:
        segment = self.current_segment()
        if segment is None or self.data is None:
            return
        row = next(r for r in self.shown if r["segment"] == segment)
        model = self.data["stats_source"] == "model_out_of_fold"
        stats = row["stats"]
        self.reval.decide(kind, segment, gate_detail(stats, model) if kind == "approve" else "")

    def action_restage(self) -> None:
        segment = self.current_segment()
        if segment is not None:
            self.reval.restage([segment], replace=True)

    def action_refresh(self) -> None:
        self.reload()
