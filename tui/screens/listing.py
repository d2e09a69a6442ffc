"""One screen for every work list an analyst goes through (reval.service.views.LISTS): a page at a time,
sorted and filtered in SQL, Enter opening the row's parcel (or segment)."""
from __future__ import annotations

from functools import partial
from typing import Any

from textual import on
from textual.app import ComposeResult
from textual.widgets import DataTable, Header, Input

from reval.service import views
from reval.service.types import ListColumn, ListPage

from .. import keys
from ..format import SHORT_CAUTION, cells, money, percent, shown
from ..jobs import Loaded, StatusBar
from ..plain import Plain
from .base import DataScreen, footer
from .prompt import PromptScreen

PAGE = 50


def list_cell(column: ListColumn, value: Any) -> str:
    """A list's value as its column reads it."""
    if value is None:
        return "–"
    kind = column["format"]
    if kind == "money":
        return money(value)
    if kind == "change":
        return percent(value)
    if kind == "weight":
        return f"{value:.2f}"
    return str(value)


class ListScreen(DataScreen):
    """A paged work list: ] [ page, s/S sort by the next/previous column, r reverses, / filters by text,
    e by segment, Enter opens the row."""

    CSS_PATH = "listing.tcss"
    BINDINGS = keys.bindings("list")

    def __init__(self, name: str, segment: str | None = None) -> None:
        super().__init__()
        self.list_name, self.segment, self.text = name, segment, ""
        spec = views.LISTS[name]
        self.sort, self.descending, self.page = spec["sort"], spec["descending"], 0
        self.data: ListPage | None = None

    def compose(self) -> ComposeResult:
        yield Header()
        yield Plain(f"{views.LISTS[self.list_name]['title']}: reading…", id="list-title")
        yield Plain("", id="list-state")
        yield DataTable(id="list-table", cursor_type="row", zebra_stripes=True)
        yield Input(placeholder="text to look for (Enter keeps it, Esc clears it)", id="list-search")
        yield Plain(SHORT_CAUTION, id="caution")
        yield StatusBar()
        yield footer()

    def on_mount(self) -> None:
        self.query_one(DataTable).focus()
        self.reload()

    def reload(self) -> None:
        self.fetch("list", partial(views.list_page, segment=self.segment, text=self.text, sort=self.sort,
                                   descending=self.descending, page=self.page, page_size=PAGE),
                   self.reval.folder, self.list_name)

    @on(Loaded)
    def show_page(self, message: Loaded) -> None:
        if message.tag != "list":
            return
        d = self.data = message.data
        self.page = d["page"]
        self.query_one("#list-title", Plain).update(d["title"])
        label = next(c["label"] for c in d["columns"] if c["key"] == d["sort"])
        filters = [f"segment {d['segment']}" if d["segment"] else "", f"text '{d['text']}'" if d["text"] else ""]
        self.query_one("#list-state", Plain).update(
            f"{d['total']:,} rows · page {d['page'] + 1}/{d['pages']} · by {label} {'▼' if d['descending'] else '▲'}"
            f" · filter: {', '.join(f for f in filters if f) or 'none'} · ⏎ opens the {d['opens']}")
        table = self.query_one(DataTable)
        table.clear(columns=True)
        for c in d["columns"]:
            table.add_column(c["label"] + (("▼" if d["descending"] else "▲") if c["key"] == d["sort"] else ""),
                             key=c["key"])
        for i, r in enumerate(d["rows"]):
            table.add_row(*cells(*(shown(list_cell(c, r.get(c["key"])), 60) for c in d["columns"])), key=str(i))

    # ---- keys --------------------------------------------------------------------------------------------

    def _sortable(self) -> list[str]:
        return [c["key"] for c in views.LISTS[self.list_name]["columns"] if c["sortable"]]

    def _again(self, page: int = 0) -> None:
        self.page = page
        self.reload()

    def action_page(self, step: int) -> None:
        if self.data is not None:
            page = min(max(self.page + step, 0), self.data["pages"] - 1)
            if page != self.page:
                self._again(page)

    def action_sort(self, step: int) -> None:
        keys_ = self._sortable()
        self.sort = keys_[(keys_.index(self.sort) + step) % len(keys_)]
        self._again()

    def action_reverse(self) -> None:
        self.descending = not self.descending
        self._again()

    def action_search(self) -> None:
        search = self.query_one("#list-search", Input)
        search.add_class("-open")
        search.focus()

    @on(Input.Submitted, "#list-search")
    def search_done(self, event: Input.Submitted) -> None:
        self.text = event.value.strip()
        self.query_one(DataTable).focus()
        self._again()

    def action_back(self) -> None:
        """Esc: out of the filter field (clearing the filter), else back to the screen below (once: a key
        handler beside this binding made one Esc leave two screens)."""
        search = self.query_one("#list-search", Input)
        if search.has_focus:
            search.value = ""
            search.remove_class("-open")
            self.query_one(DataTable).focus()
            if self.text:
                self.text = ""
                self._again()
        else:
            self.dismiss()

    def action_segment_filter(self) -> None:
        def chosen(segment: str | None) -> None:
            if segment is not None:
                self.segment = segment or None
                self._again()

        self.app.push_screen(PromptScreen("Show one segment's rows", "segment name (empty: every segment)",
                                          value=self.segment or ""), chosen)

    @on(DataTable.RowSelected, "#list-table")
    def row_chosen(self) -> None:
        self.action_open_row()

    def action_open_row(self) -> None:
        if self.data is None or not self.data["rows"]:
            return
        row = self.data["rows"][self.query_one(DataTable).cursor_row]
        if row.get("parcel_id"):
            self.reval.open_parcel(row["parcel_id"])
        elif row.get("segment"):
            self.reval.open_segment(row["segment"])
