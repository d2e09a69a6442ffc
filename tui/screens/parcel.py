"""One parcel: its value split into feature contributions that add up exactly, prior value, sales, flags."""
from __future__ import annotations

from pathlib import Path
from typing import Any

from textual import on
from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import DataTable, Header, Static

from reval.service import actions, views
from reval.service.types import ComparableGrid, ParcelDetail, Record
from reval.service.wording import grid_table, indicated_range

from .. import keys
from ..format import SHORT_CAUTION, cells, measured_from, money, number, percent, shown, signed_money
from ..jobs import Loaded, StatusBar
from ..outcomes import describe_parcel_report
from ..plain import Plain
from .base import DataScreen, footer
from .prompt import PromptScreen


def feature_text(f: Record) -> str:
    if f["value"] is None:
        return "missing"
    return f["label"] if f["label"] is not None else f"{f['value']:.6g}"


class ParcelScreen(DataScreen):
    """Find a parcel by id and show why it has its value."""

    CSS_PATH = "parcel.tcss"
    BINDINGS = keys.bindings("parcel")

    def __init__(self, parcel_id: str) -> None:
        super().__init__()
        self.parcel_id = parcel_id
        self.data: ParcelDetail | None = None

    def compose(self) -> ComposeResult:
        yield Header()
        yield Plain(f"Parcel {self.parcel_id}: reading…", id="parcel-title")
        with VerticalScroll(id="parcel-body"):
            with Horizontal(id="parcel-top"):
                yield DataTable(id="parcel-value", cursor_type="none", show_cursor=False)
                yield DataTable(id="parcel-features", cursor_type="none", show_cursor=False)
            yield Plain("Contributions", classes="section", id="parts-title")
            yield DataTable(id="parcel-parts", cursor_type="none", show_cursor=False)
            yield Plain("", id="parcel-parts-note")
            yield Static("Comparable sales adjusted by the model", classes="section")
            yield Plain("reading…", id="parcel-comparables-note")
            yield DataTable(id="parcel-comparables", cursor_type="none", show_cursor=False)
            yield Static("Sales", classes="section")
            yield DataTable(id="parcel-sales", cursor_type="none", show_cursor=False)
            yield Static("Flags", classes="section")
            yield Plain("", id="parcel-flags")
        yield Static(SHORT_CAUTION, id="caution")
        yield StatusBar()
        yield footer()

    def on_mount(self) -> None:
        self.query_one("#parcel-body").focus()
        self.reload()

    def reload(self) -> None:
        self.fetch("parcel", views.parcel_detail, self.reval.folder, self.parcel_id)
        self.fetch("comparables", views.parcel_comparables, self.reval.folder, self.parcel_id)

    def on_load_failed(self, message: Any) -> None:
        target = "#parcel-comparables-note" if message.tag == "comparables" else "#parcel-title"
        self.query_one(target, Static).update(f"✗ {message.error}")
        super().on_load_failed(message)
        self.fetch("suggestions", views.parcel_suggestions, self.reval.folder, self.parcel_id)

    def offer(self, near: list[str]) -> None:
        """No such parcel: offer the closest id in the prompt, so Enter accepts "did you mean"."""
        if near and self.is_current:
            self.dismiss()   # the prompt is asked for once this screen is gone (its callback needs a live screen)
            self.app.call_later(self.reval.ask_parcel, f"No parcel {self.parcel_id!r}: did you mean {near[0]}?",
                                near[0], "Enter opens it; or type another id (others close: "
                                + (", ".join(near[1:]) or "none") + ").")

    @on(Loaded)
    def show_parcel(self, message: Loaded) -> None:
        if message.tag == "suggestions":
            self.offer(message.data)
            return
        if message.tag == "comparables":
            self._comparables(message.data)
            return
        d = self.data = message.data
        self.query_one("#parcel-title", Static).update(
            f"Parcel {d['parcel_id']} · segment {d['segment']} · market area {d['market_area']} · "
            f"{d['property_class']}")
        self._value_panel(d)
        features = self.query_one("#parcel-features", DataTable)
        features.clear(columns=True)
        features.add_columns("Feature", "Value")
        for f in d["features"]:
            features.add_row(*cells(f["name"], feature_text(f)))
        self._parts(d)
        self._sales(d)
        flags = d["flags"]
        self.query_one("#parcel-flags", Static).update(
            "\n".join(f"! {f}" for f in flags) if flags else "none")

    def _value_panel(self, d: ParcelDetail) -> None:
        table = self.query_one("#parcel-value", DataTable)
        table.clear(columns=True)
        table.add_columns("Value", "Amount")
        estimate = d["estimate"]
        table.add_row(*cells("Model value", money(estimate["market_value"]) if estimate else "– (no run: f)"))
        table.add_row(*cells("Prior market value", money(d["prior_value"])))
        table.add_row(*cells("Prior assessed", money(d["prior_assessed_value"])))
        table.add_row(*cells("Change", percent(d["value_change"])))
        if estimate:
            table.add_row(*cells("Model", estimate["kind"].replace("_", " ")))
        override = d["override"]
        if override is not None:
            table.add_row(*cells("Override", f"{money(override['value'])} ({override['reason']})"))
        for r in d["roll"][:1]:
            table.add_row(*cells(f"Roll batch {r['batch_id']}", r["state"]))
            for name in ("market", "land", "improvement", "assessed", "assessed_land", "assessed_improvement"):
                table.add_row(*cells(f"  {name.replace('_', ' ').capitalize()}", money(r[f"{name}_value"])))
            if r["override_reason"]:
                table.add_row(*cells("  Overridden", f"{r['override_reason']}; model {money(r['model_value'])}"))

    def _parts(self, d: ParcelDetail) -> None:
        table = self.query_one("#parcel-parts", DataTable)
        table.clear(columns=True)
        note = self.query_one("#parcel-parts-note", Static)
        split, estimate = d["split"], d["estimate"]
        if split is None or estimate is None:
            note.update("No contributions yet: they come with a model run (press f to fit).")
            return
        self.query_one("#parts-title", Static).update(f"Contributions (model of run {shown(d['run_id'], 40)})")
        table.add_columns("Part", "Log value", "Value", "% of value")
        table.add_row(*cells("base (reference parcel)", number(split["base_log"], ".4f"), money(split["base"]), ""))
        for p in split["parts"]:
            table.add_row(*cells(p["term"], number(p["log"], "+.4f"), signed_money(p["currency"]),
                          percent(p["currency"] / split["value"])))
        total = split["base"] + sum(p["currency"] for p in split["parts"])
        table.add_row(*cells("= value", number(estimate["log_value"], ".4f"), money(total), ""))
        note.update(f"The parts add up to the value exactly ({money(total)}). The log parts add up to the "
                    "log value; the value beyond the base is shared in proportion to them. "
                    + measured_from(d["segment"], d["reference"]))

    def _sales(self, d: ParcelDetail) -> None:
        table = self.query_one("#parcel-sales", DataTable)
        table.clear(columns=True)
        table.add_columns("Sale", "Date", "Price", "Adjusted", "Qualified", "Ratio (out-of-fold)")
        for s in d["sales"]:
            table.add_row(*cells(s["sale_id"], s["sale_date"], money(s["sale_price"]), money(s["adjusted_price"]),
                          "yes" if s["qualified"] else f"no: {s['reason'] or 'not checked yet'}",
                          number(s["oof_ratio"], ".3f")))
        if not d["sales"]:
            table.add_row(*cells("no recorded sale", "", "", "", "", ""))

    def _comparables(self, grid: ComparableGrid | None) -> None:
        table = self.query_one("#parcel-comparables", DataTable)
        table.clear(columns=True)
        note = self.query_one("#parcel-comparables-note", Static)
        if grid is None:
            note.update("No comparables yet: they are adjusted by a run's model (press f to fit).")
            return
        note.update(indicated_range(grid))
        if grid["comparables"]:
            header, rows = grid_table(grid)
            table.add_columns(*header)
            for row in rows:
                table.add_row(*cells(*row))

    def action_report(self) -> None:
        """Ask for a file name, then write the one-page report in the job thread."""
        def chosen(name: str | None) -> None:
            if name:
                target = Path(name) if Path(name).is_absolute() else self.reval.folder / name
                self.reval.start_job("report", f"Writing the report of parcel {self.parcel_id} to {target}",
                                     actions.parcel_report, self.reval.folder, self.parcel_id, target,
                                     describe=describe_parcel_report)

        self.app.push_screen(PromptScreen("Write this parcel's one-page report", "file name (.html or .pdf)",
                                          required=True, value=f"parcel_{self.parcel_id}.pdf"), chosen)

    def action_back(self) -> None:
        self.dismiss()

    def action_override(self) -> None:
        if self.data is not None:
            estimate = self.data["estimate"]
            self.reval.override(self.data["parcel_id"], self.data["override_reasons"],
                                estimate["market_value"] if estimate else None)

    def action_remove_override(self) -> None:
        if self.data is not None:
            self.reval.remove_override(self.data["parcel_id"])

    def action_open_segment(self) -> None:
        if self.data is not None:
            self.reval.open_segment(self.data["segment"])
