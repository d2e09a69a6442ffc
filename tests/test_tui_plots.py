"""The smaller findings of issue 15 about plots and figures: years on axes, elasticities, legends that differ
by shape, no "nothing to plot" while a plot's data is still being read, the help's promise about lines."""
from __future__ import annotations

import asyncio
from pathlib import Path

from helpers import settle, table_rows
from test_tui import SIZE
from textual.app import App, ComposeResult
from textual.widgets import Static

from reval.data.config import load_config
from reval.service import views
from tui.app import RevalApp
from tui.plot import LEGEND_MARKS, Bars, Chart, LevelBars
from tui.screens.help import HelpScreen
from tui.screens.segment import SegmentScreen, axis_number


def test_years_on_axes_have_no_thousands_separator() -> None:
    # Finding: years on axes read `1,913 … 2,006`.
    assert [axis_number(v) for v in (1913.0, 2006.0, 8000.0, 25_000.0, 0.5)] == ["1913", "2006", "8000", "25,000",
                                                                               "0.5"]


def test_elasticity_only_for_features_modelled_in_logs(fitted_demo: Path) -> None:
    # Finding: an elasticity was given for year built (a year has no true zero: % per % of the year is
    # meaningless). Elasticities stay for the features modelled in logs.
    logged = {f.name for f in load_config(fitted_demo).features if f.log}
    segment = views.overview(fitted_demo)["segments"][0]["segment"]
    effects = views.segment_detail(fitted_demo, segment)["marginal_effects"]
    by_feature = {r["feature"]: r["elasticity"] for r in effects}
    assert by_feature["year_built"] is None and "year_built" not in logged
    assert logged and all(by_feature[f] is not None for f in logged if f in by_feature)


def test_legend_glyphs_differ_by_shape() -> None:
    # Finding: legend glyphs differed only by colour (market area vs segment, sold vs unsold).
    assert LEGEND_MARKS["line"] != LEGEND_MARKS["parent"]
    assert LEGEND_MARKS["points"] != LEGEND_MARKS["alt"]


class PlotHost(App[None]):
    def compose(self) -> ComposeResult:
        yield Chart(id="chart")
        yield Bars(id="bars")
        yield LevelBars(id="levels")


def test_plots_say_reading_until_their_data_arrives() -> None:
    asyncio.run(_plots_say_reading_until_their_data_arrives())


async def _plots_say_reading_until_their_data_arrives() -> None:
    # Finding: "nothing to plot" flashed while a segment's data was loading.
    app = PlotHost()
    async with app.run_test(size=(60, 20)):
        for name in ("#chart", "#bars", "#levels"):
            assert str(app.query_one(name).render()) == "reading…", name
        app.query_one(Chart).show(None)
        assert str(app.query_one(Chart).render()) == "nothing to plot"


def test_help_describes_only_lines_the_plots_draw(fitted_demo: Path) -> None:
    asyncio.run(_help_describes_only_lines_the_plots_draw(fitted_demo))


async def _help_describes_only_lines_the_plots_draw(fitted_demo: Path) -> None:
    # Finding: the help promised dashed limit lines that the plots do not draw.
    app = RevalApp(fitted_demo)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, SegmentScreen)
        await pilot.press("question_mark")
        assert isinstance(app.screen, HelpScreen)
        text = str(app.screen.query_one("#help-plots", Static).render())
    assert "limit" not in text
    assert all(mark in text for mark in (LEGEND_MARKS["line"], LEGEND_MARKS["parent"], LEGEND_MARKS["reference"]))


def test_did_you_mean_is_accepted_with_enter(fitted_demo: Path) -> None:
    asyncio.run(_did_you_mean_is_accepted_with_enter(fitted_demo))


async def _did_you_mean_is_accepted_with_enter(fitted_demo: Path) -> None:
    # Finding: "did you mean 0061148?" could not be accepted with a key.
    from helpers import type_text
    from tui.screens.parcel import ParcelScreen
    from tui.screens.prompt import PromptScreen

    parcel_id = views.list_page(fitted_demo, "changes", page_size=1)["rows"][0]["parcel_id"]
    typed = parcel_id.lstrip("0")[:-1] or parcel_id[-3:]
    near = views.parcel_suggestions(fitted_demo, typed)
    assert near
    app = RevalApp(fitted_demo)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("o")
        await type_text(pilot, typed)
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, PromptScreen) and near[0] in app.screen.title_text
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, ParcelScreen) and app.screen.data is not None
        assert app.screen.data["parcel_id"] == near[0]


def test_prior_against_new_value_scatter_per_segment(fitted_demo: Path) -> None:
    asyncio.run(_prior_against_new_value_scatter_per_segment(fitted_demo))


async def _prior_against_new_value_scatter_per_segment(fitted_demo: Path) -> None:
    # Finding: no prior-vs-new scatter. The value change tab plots each parcel's new value against its prior
    # value (log scales), every parcel of the segment up to 2,000.
    import math

    from helpers import query_frame

    segment = views.overview(fitted_demo)["segments"][0]["segment"]
    pairs = query_frame(fitted_demo, """SELECT p.prior_value, e.market_value FROM parcel_estimates e
                                        JOIN parcels p USING (parcel_id)
                                        WHERE e.segment = ? AND p.prior_value > 0""", [segment])
    assert 0 < len(pairs) <= 2000
    app = RevalApp(fitted_demo)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("enter")
        await settle(pilot)
        await pilot.press("4")
        chart = app.screen.query_one("#prior-new", Chart)
        assert chart.data is not None
        points = next(layer for layer in chart.data.layers if layer.kind == "points")
    shown = sorted(zip((round(10 ** x) for x in points.x), (round(10 ** y) for y in points.y)))
    assert shown == sorted(zip((round(v) for v in pairs["prior_value"]), (round(v) for v in pairs["market_value"])))
    assert not any(math.isnan(v) for v in points.y)


def test_units_on_every_axis_at_80_by_24(fitted_demo: Path) -> None:
    asyncio.run(_units_on_every_axis(fitted_demo))


async def _units_on_every_axis(fitted_demo: Path) -> None:
    # Finding: axes and marginal effects had no units. Features declare theirs in the config (`unit`); values
    # read in currency, ratios say they have none, changes are in %, years carry no thousands separator.
    units = {f.name: f.unit for f in load_config(fitted_demo).features}
    assert units["living_area"] == "sq ft" and units["year_built"] == "year"
    app = RevalApp(fitted_demo)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("enter")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, SegmentScreen) and screen.data is not None
        names = [c["feature"] for c in screen.data["curves"]]
        chart = screen.query_one("#curve-chart", Chart)
        text = str(chart.render())
        assert "→ living area (sq ft)" in text and "↑ effect on value (%)" in text, text
        assert str(screen.query_one("#curve-title", Static).render()).startswith("living area (sq ft) · 1 of")
        await pilot.press(*["right_square_bracket"] * names.index("year_built"))
        text = str(chart.render())
        ticks = text.splitlines()[-2]
        assert "→ year built (year)" in text and ticks.split() and all("," not in t for t in ticks.split()), ticks
        await pilot.press("2")
        await settle(pilot)
        rows = {r[0]: r for r in table_rows(screen.query_one("#marginal"))}
        assert rows["living area (sq ft)"][1].endswith(" per sq ft") and rows["living area (sq ft)"][2] != "–"
        assert rows["year built (year)"][1].endswith(" per year") and rows["year built (year)"][2] == "–"
        assert rows["waterfront"][1].endswith(" yes vs no")
        await pilot.press("3")
        await settle(pilot)
        scatter = str(screen.query_one("#ratio-scatter", Chart).render())
        assert "sale price (currency, log)" in scatter and "(no unit)" in scatter, scatter
        assert "median ratio (no unit)" in str(screen.query_one("#decile-chart", Chart).render())
        await pilot.press("4")
        await settle(pilot)
        bars = str(screen.query_one("#change-bars", Bars).render())
        assert "change in value (%)" in bars and "share of parcels (%)" in bars, bars
        prior_new = str(screen.query_one("#prior-new", Chart).render())
        assert "prior value (currency, log)" in prior_new and "new value (currency, log)" in prior_new
