"""One segment in depth: curves, interactions and effects, equity, value change, sales, reference models."""
from __future__ import annotations

import math
from typing import Any

from textual import on
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.widgets import DataTable, Header, Static, TabbedContent, TabPane

from reval.service import actions, views
from reval.service.types import Curve, SalesPage, SegmentDetail, SegmentReview
from reval.service.wording import flag_counts

from .. import keys
from ..format import (
    NAME_WIDTH,
    STAT_NAMES,
    cells,
    ci_text,
    feature_label,
    gate_detail,
    money,
    number,
    percent,
    short_money,
    shown,
    signed_money,
    stat_cell,
)
from ..jobs import Loaded, StatusBar
from ..outcomes import SALE_DECISIONS, describe_sale_decision
from ..plot import (
    Bars,
    BarsData,
    Chart,
    ChartData,
    Layer,
    LevelBar,
    LevelBars,
    percent_axis,
)
from ..plain import Plain
from .base import DataScreen, footer
from .prompt import PromptScreen

TABS = ("curves", "effects", "equity", "change", "sales", "reference")
NO_RUN = "No model run yet — press f to fit."
EFFECT_TITLE = "effect on value (%)"
PER_UNIT = {"continuous": " per unit", "ordinal": " per level", "binary": " yes vs no"}
RATIO_TITLE = "ratio, value ÷ price (no unit)"
SALES_PAGE = 50


def axis_number(v: float) -> str:
    """An axis label: thousands separated only from 10,000, so years read 1913 … 2006."""
    if abs(v) >= 10_000:
        return f"{v:,.0f}"
    return f"{v:.0f}" if abs(v) >= 100 else f"{v:.3g}"


def model_line(d: SegmentDetail) -> str:
    m = d["model"]
    if m is None:
        return "Model: none yet (press f to fit)"
    kinds = {"own": "its own deviation from its parent", "pooled": "pooled toward its parent",
             "parent_only": "its parent's model"}
    text = f"Model: {kinds.get(m['kind'], m['kind'])}"
    if m["borrowed_share"] is not None and m["kind"] != "parent_only":
        text += f", {m['borrowed_share']:.0%} borrowed from the parent"
    if m["reason"]:
        text += f" ({m['reason']})"
    return text


def curve_chart(c: Curve) -> ChartData:
    x = c["x"]
    layers = (Layer("band", x, c["lo"], c["hi"], style="band", label="95% band"),
              Layer("line", x, c["parent_effect"], style="parent", label="market area"),
              Layer("line", x, c["effect"], style="line", label="segment"),
              Layer("hline", y=(0.0,), style="reference"))
    return ChartData(layers, x_format=axis_number, y_format=percent_axis, strip=tuple(c["data_bins"]),
                     strip_label="data", x_title=feature_label(c["feature"], c["unit"]), y_title=EFFECT_TITLE)


def level_bars(c: Curve) -> list[LevelBar]:
    def pct(v: float | None) -> float | None:
        return None if v is None else 100 * math.expm1(v)

    labels = c["levels"] or [axis_number(v) for v in c["x"]]
    counts = c["data_bins"]
    out = []
    for x, e, lo, hi, p in zip(c["x"], c["effect"], c["lo"], c["hi"], c["parent_effect"]):
        i = int(x)
        name = labels[i] if i < len(labels) else axis_number(x)
        n = counts[i] if i < len(counts) else 0
        out.append(LevelBar(f"{shown(name, NAME_WIDTH // 2)} (n={n:,})", pct(e) or 0.0, pct(lo), pct(hi), pct(p)))
    return out


def prior_new_chart(prior: list[float], new: list[float]) -> ChartData | None:
    """New against prior value on log scales (currency on both axes), with the line of no change."""
    if not prior:
        return None
    px, ny = [math.log10(v) for v in prior], [math.log10(max(v, 1.0)) for v in new]
    lo, hi = min(px + ny), max(px + ny)
    return ChartData((Layer("line", (lo, hi), (lo, hi), style="reference", label="no change"),
                      Layer("points", px, ny, style="points", label="parcel")),
                     x_range=(lo, hi), y_range=(lo, hi), x_format=lambda v: short_money(10 ** v),
                     y_format=lambda v: short_money(10 ** v), x_title="prior value (currency, log)",
                     y_title="new value (currency, log)")


def chasing_line(review: SegmentReview | None) -> str:
    """The core's sales-chasing verdict for the staged values, in one line."""
    if review is None:
        return "Sales-chasing check: no staged values yet (press v after a fit)."
    c = review["sales_chasing"]
    verdicts = {"pass": "✓ no sign of sales chasing", "flagged": "✗ FLAGGED: possible sales chasing",
                "too_few_sales": "~ too few sales to judge"}
    figures = []
    if c["p_value"] is not None and c["ks_p_value"] is not None:
        figures.append(f"changes sold vs unsold: Mann-Whitney p = {c['p_value']:.2g}, Kolmogorov-Smirnov p = "
                       f"{c['ks_p_value']:.2g}")
    if c["roll_cod"] is not None:
        figures.append(f"COD of the roll on the sales {c['roll_cod']:.1f}"
                       + ("" if c["oof_cod"] is None else f" vs {c['oof_cod']:.1f} out of fold"))
    if c["n_at_price"] is not None and c["expected_at_price"] is not None:
        figures.append(f"{c['n_at_price']} valued at their sale price ({c['expected_at_price']:.1f} expected)")
    why = "".join(f" ✗ {reason}." for reason in c["reasons"])
    shown = f" ({'; '.join(figures)})" if figures else ""
    return (f"Sales-chasing check (batch {review['batch_id']}, {review['state']}): "
            f"{verdicts.get(c['status'], c['status'])}{shown}.{why} {review['n_beyond_threshold']:,} "
            "parcels change beyond the review threshold.")


def flags_line(review: SegmentReview | None) -> str:
    """Parcels of the reviewed batch per kind of flag, and what blocks its approval."""
    if review is None:
        return ""
    blocked = "".join(f"\n✗ Cannot be approved: {b}" for b in review["blockers"])
    return f"Flagged parcels (batch {review['batch_id']}): {flag_counts(review['flags'])}.{blocked}"


class SegmentScreen(DataScreen):
    """The drill-in of one segment, one tab per question an assessor asks of its model."""

    CSS_PATH = "segment.tcss"
    BINDINGS = keys.bindings("segment")

    def __init__(self, segment: str) -> None:
        super().__init__()
        self.segment = segment
        self.data: SegmentDetail | None = None
        self.curve_index = 0
        self.sales_page = 0
        self.sales: SalesPage | None = None

    def compose(self) -> ComposeResult:
        yield Header()
        yield Plain(f"Segment {self.segment}: reading…", id="segment-title")
        yield Plain("", id="segment-model")
        with TabbedContent(id="tabs"):
            with TabPane("1 Curves", id="curves"):
                yield Plain("", id="curve-title")
                yield Chart(id="curve-chart")
                yield LevelBars(id="curve-levels")
            with TabPane("2 Effects", id="effects"):
                with VerticalScroll():
                    yield Static("Selected interactions", classes="section")
                    yield DataTable(id="interactions", cursor_type="row")
                    yield Plain("", id="interaction-readings")
                    yield Static("Marginal effects at the segment's typical parcel", classes="section")
                    yield DataTable(id="marginal", cursor_type="row")
            with TabPane("3 Equity", id="equity"):
                with VerticalScroll():
                    yield Plain("", id="equity-title")
                    yield DataTable(id="equity-table", cursor_type="row")
                    with Horizontal(id="equity-plots"):
                        with Vertical():
                            yield Static("Ratio by sale price", classes="plot-title")
                            yield Chart(id="ratio-scatter")
                        with Vertical():
                            yield Static("Median ratio by price decile",
                                         classes="plot-title")
                            yield Chart(id="decile-chart")
            with TabPane("4 Value change", id="change"):
                yield Plain("", id="change-summary")
                with Horizontal(id="change-plots"):
                    with Vertical():
                        yield Static("Change, share of parcels", classes="plot-title")
                        yield Bars(id="change-bars")
                    with Vertical():
                        yield Static("New value against prior value", classes="plot-title")
                        yield Chart(id="prior-new")
            with TabPane("5 Sales", id="sales"):
                yield Plain("", id="sales-title")
                yield DataTable(id="sales-table", cursor_type="row", zebra_stripes=True)
            with TabPane("6 Reference models", id="reference"):
                yield Plain("", id="reference-title")
                yield DataTable(id="reference-table", cursor_type="row")
        yield StatusBar()
        yield footer()

    def on_mount(self) -> None:
        self.reload()

    def reload(self) -> None:
        self.fetch("segment", views.segment_detail, self.reval.folder, self.segment)
        self.fetch("sales", views.segment_sales, self.reval.folder, self.segment, self.sales_page,
                   SALES_PAGE)

    @on(Loaded)
    def loaded(self, message: Loaded) -> None:
        if message.tag == "segment":
            self.data = message.data
            self.show_segment(message.data)
        elif message.tag == "sales":
            self.sales = message.data
            self.show_sales(message.data)

    def on_load_failed(self, message: Any) -> None:
        self.query_one("#segment-title", Static).update(f"✗ {message.error}")
        super().on_load_failed(message)

    def show_segment(self, d: SegmentDetail) -> None:
        state = f" · {d['batches']}" if d.get("state") else ""
        self.query_one("#segment-title", Static).update(
            f"Segment {d['segment']} · market area {d['market_area']} · {d['parcels']:,} parcels · "
            f"{d['sales']:,} qualified sales{state}")
        self.query_one("#segment-model", Static).update(model_line(d))
        self.show_curve()
        self.show_effects(d)
        self.show_equity(d)
        self.show_change(d)
        self.show_reference(d)

    # ---- curves ------------------------------------------------------------------------------------------

    def show_curve(self) -> None:
        assert self.data is not None
        curves = self.data["curves"]
        title = self.query_one("#curve-title", Static)
        chart, levels = self.query_one("#curve-chart", Chart), self.query_one("#curve-levels", LevelBars)
        if not curves:
            title.update(NO_RUN)
            chart.display, levels.display = False, False
            return
        self.curve_index %= len(curves)
        c = curves[self.curve_index]
        continuous = c["kind"] == "continuous"
        title.update(f"{feature_label(c['feature'], c['unit'])} · {self.curve_index + 1} of {len(curves)} (] next, "
                     f"[ previous) · {EFFECT_TITLE}")
        chart.display, levels.display = continuous, not continuous
        if continuous:
            chart.show(curve_chart(c))
        else:
            levels.show(level_bars(c))

    def action_page(self, step: int) -> None:
        active = self.query_one(TabbedContent).active
        if active == "curves" and self.data is not None:
            self.curve_index += step
            self.show_curve()
        elif active == "sales" and self.sales is not None:
            page = min(max(self.sales_page + step, 0), self.sales["pages"] - 1)
            if page != self.sales_page:
                self.sales_page = page
                self.fetch("sales", views.segment_sales, self.reval.folder, self.segment, page, SALES_PAGE)

    def action_tab(self, index: int) -> None:
        self.query_one(TabbedContent).active = TABS[index]

    @on(TabbedContent.TabActivated)
    def tab_shown(self, event: TabbedContent.TabActivated) -> None:
        """Put the keys on the tab's table, so arrows and Enter act on its rows."""
        tables = event.pane.query(DataTable)
        if tables:
            tables.first().focus()

    # ---- interactions and marginal effects ---------------------------------------------------------------

    def show_effects(self, d: SegmentDetail) -> None:
        table = self.query_one("#interactions", DataTable)
        table.clear(columns=True)
        readings = self.query_one("#interaction-readings", Static)
        if d["run_id"] is None:
            readings.update(NO_RUN)
        else:
            table.add_columns("Term", "Coefficient", "SE", "p", "Both +1 SD")
            for r in d["interactions"]:
                table.add_row(*cells(r["term"], number(r["coef"], "+.4f"), number(r["se"], ".4f"),
                              number(r["p_value"], ".3g"), percent(math.expm1(r["coef"]))))
            readings.update("\n".join(f"• {r['term']}: {r['reading']}" for r in d["interactions"])
                            or "No interaction was selected for this segment: its features act additively.")
        marginal = self.query_one("#marginal", DataTable)
        marginal.clear(columns=True)
        if d["marginal_effects"]:
            marginal.add_columns("Feature", "Value per unit (currency)", "Elasticity (% per 1 %)")
            for r in d["marginal_effects"]:
                per = PER_UNIT.get(r["kind"], "") if not r["unit"] else f" per {r['unit']}"
                marginal.add_row(*cells(feature_label(r["feature"], r["unit"]), signed_money(r["value_per_unit"]) + per,
                                        number(r["elasticity"], "+.3f")))

    # ---- equity ------------------------------------------------------------------------------------------

    def show_equity(self, d: SegmentDetail) -> None:
        e = d["equity"]
        confidence = f"{e['confidence']:.0%} " if e["confidence"] else ""
        self.query_one("#equity-title", Static).update(
            f"Ratios of {d['stats_short']}: {e['n']:,} sales, {e['n_trimmed']:,} trimmed (✂ on the sales tab)")
        table = self.query_one("#equity-table", DataTable)
        table.clear(columns=True)
        table.add_columns("Statistic", "Value and verdict", f"{confidence}interval", "Standard")
        for stat in ("median_ratio", "cod", "prd", "prb"):
            cell = e["stats"][stat]
            table.add_row(*cells(STAT_NAMES[stat], stat_cell(cell, stat), ci_text(cell, stat), cell["limit"] or "–"))
        scatter = self.query_one("#ratio-scatter", Chart)
        if e["price"]:
            logs = [math.log10(p) for p in e["price"]]
            ratios = e["ratio"]
            y_range = (max(0.3, min(ratios) - 0.05), min(2.5, max(ratios) + 0.05))
            scatter.show(ChartData((Layer("hline", y=(1.0,), style="reference", label="ratio 1.0"),
                                    Layer("points", logs, ratios, style="points", label="sale")),
                                   y_range=y_range, x_format=lambda v: short_money(10 ** v),
                                   y_format=lambda v: f"{v:.2f}", x_title="sale price (currency, log)",
                                   y_title=RATIO_TITLE))
        else:
            scatter.show(None)
        deciles = [v for v in e["decile_median_ratios"] if v is not None]
        proxy = [v for v in e["proxy_decile_median_ratios"] if v is not None]
        chart = self.query_one("#decile-chart", Chart)
        if deciles:
            xs = list(range(1, len(deciles) + 1))
            # sorting by price alone puts sales priced high by chance at the top: the value proxy (IAAO, half
            # value, half price) shows the regressivity of the values themselves
            chart.show(ChartData((Layer("hline", y=(1.0,), style="reference", label="1.0"),
                                  Layer("line", xs, deciles, style="line", label="by price"),
                                  Layer("points", xs, deciles, style="alt"),
                                  Layer("line", list(range(1, len(proxy) + 1)), proxy, style="parent",
                                        label="by value proxy")),
                                 x_range=(0.5, len(deciles) + 0.5),
                                 x_format=lambda v: "low" if v < 1 else "high" if v > 10 else "",
                                 y_format=lambda v: f"{v:.2f}", x_title="decile (tenths of the sales)",
                                 y_title="median ratio (no unit)"))
        else:
            chart.show(None)

    # ---- value change ------------------------------------------------------------------------------------

    def show_change(self, d: SegmentDetail) -> None:
        summary, bars = self.query_one("#change-summary", Static), self.query_one("#change-bars", Bars)
        v = d["value_change"]
        if v is None or v["lo"] is None or v["hi"] is None:
            summary.update(NO_RUN if d["run_id"] is None else "No values to compare with prior values.")
            bars.show(None)
            self.query_one("#prior-new", Chart).show(None)
            return
        sold, unsold = v["median_sold"], v["median_unsold"]
        gap = sold - unsold if sold is not None and unsold is not None else None
        medians = (f"New market value against prior value. Median change: sold {percent(v['median_sold'])} "
                   f"({v['n_sold']:,} parcels), unsold {percent(v['median_unsold'])} ({v['n_unsold']:,}); "
                   f"difference {'–' if gap is None else f'{100 * gap:+.1f} points'}.")
        summary.update("\n".join(filter(None, (medians, chasing_line(d["review"]), flags_line(d["review"])))))
        bars.show(BarsData((("unsold", tuple(v["unsold"]), "points"), ("sold", tuple(v["sold"]), "alt")),
                           v["lo"], v["hi"], x_format=lambda x: f"{x:+.0%}", open_ends=True,
                           x_title="change in value (%)", y_title="share of parcels (%)"))
        self.query_one("#prior-new", Chart).show(prior_new_chart(v["prior"], v["new"]))

    # ---- sales -------------------------------------------------------------------------------------------

    def show_sales(self, s: SalesPage) -> None:
        self.sales_page = s["page"]
        self.query_one("#sales-title", Static).update(
            f"{s['total']:,} sales (excluded by you first), ratios of {s['values']}, farthest from 1 first · page "
            f"{s['page'] + 1}/{s['pages']} (] [) · ✂ trimmed · {s['downweighted']:,} down-weighted by the fit "
            "(weight < 1, why at the right) · Enter: parcel · e: exclude · i: reinstate")
        table = self.query_one("#sales-table", DataTable)
        table.clear(columns=True)
        table.add_columns("Sale", "Parcel", "Date", "Price", "Adjusted", "Value", "Ratio", "✂", "Weight", "Why")
        for r in s["rows"]:
            weight = r["weight"]
            table.add_row(*cells(r["sale_id"], r["parcel_id"], r["sale_date"], money(r["sale_price"]),
                          money(r["adjusted_price"]), money(r["value"]), number(r["ratio"], ".3f"),
                          "✂" if r["trimmed"] else "", "" if weight is None or weight >= 1 else f"{weight:.2f}",
                          r["weight_reason"] or ""), key=f"{r['sale_id']}/{r['parcel_id']}")

    def action_decide_sale(self, decision: str) -> None:
        """Exclude or reinstate the highlighted sale with a reason (reval.service.actions.decide_sale, audited)."""
        if self.sales is None or not self.sales["rows"] or self.query_one(TabbedContent).active != "sales":
            return
        sale_id = self.sales["rows"][self.query_one("#sales-table", DataTable).cursor_row]["sale_id"]
        title, asked = SALE_DECISIONS[decision]

        def answered(reason: str | None) -> None:
            if reason is None:
                self.reval.report(f"Sale {sale_id}: nothing changed.", "warning")
                return
            self.reval.start_job("sale", f"Sale {sale_id}: {decision}", actions.decide_sale, self.reval.folder,
                                 sale_id, decision, reason, describe=describe_sale_decision)

        self.reval.push_screen(PromptScreen(title.format(sale_id=sale_id), asked, required=True), answered)

    @on(DataTable.RowSelected, "#sales-table")
    def sale_chosen(self) -> None:
        self.action_open_sale_parcel()

    def action_open_sale_parcel(self) -> None:
        table = self.query_one("#sales-table", DataTable)
        if self.sales and self.sales["rows"] and self.query_one(TabbedContent).active == "sales":
            self.reval.open_parcel(self.sales["rows"][table.cursor_row]["parcel_id"])

    # ---- reference models --------------------------------------------------------------------------------

    def show_reference(self, d: SegmentDetail) -> None:
        title = self.query_one("#reference-title", Static)
        table = self.query_one("#reference-table", DataTable)
        table.clear(columns=True)
        if not d["reference_accuracy"]:
            title.update(NO_RUN if d["run_id"] is None else "No reference models were scored in this run.")
            return
        n = d["reference_accuracy"][0]["n"]
        title.update(f"Every model out of fold on the same sales ({n:,} here) and folds, none trimmed; the ratio "
                     "study trims outliers, so its COD differs. RMSE is of log value: lower is better. "
                     + d["structure"])
        table.add_columns("Model", "Scope", "n", "RMSE log", "Median", "COD", "PRD", "PRB")
        for r in d["reference_accuracy"]:
            table.add_row(*cells(r["model_name"], r["segment"], f"{r['n']:,}", number(r["rmse_log"], ".3f"),
                          number(r["median_ratio"], ".3f"), number(r["cod"], ".1f"), number(r["prd"], ".3f"),
                          number(r["prb"], "+.3f")))

    # ---- decisions ---------------------------------------------------------------------------------------

    def action_back(self) -> None:
        self.dismiss()

    def action_approve(self) -> None:
        e = self.data["equity"] if self.data else None
        detail = gate_detail(e["stats"], e["model_values"]) if e else ""
        self.reval.decide("approve", self.segment, detail)

    def action_hold(self) -> None:
        self.reval.decide("hold", self.segment)

    def action_revoke(self) -> None:
        self.reval.decide("revoke", self.segment)
