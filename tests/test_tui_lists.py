"""The lists an analyst works through, reachable from the keyboard (issue 15): value changes beyond the review
threshold, excluded and down-weighted sales with why, the audit log by segment. Each is one page at a time,
sorted and filtered in SQL, Enter opening the parcel (the log: the segment)."""
from __future__ import annotations

import asyncio
from pathlib import Path

from helpers import query_frame, settle, table_rows, type_text
from test_tui import SIZE, open_segment

from reval.data.config import load_config
from reval.service import actions, views
from tui.app import RevalApp
from tui.screens.listing import PAGE, ListScreen
from tui.screens.parcel import ParcelScreen
from tui.screens.segment import SegmentScreen


def test_value_changes_beyond_the_threshold_are_listed_and_open_the_parcel(fitted_demo: Path) -> None:
    asyncio.run(_value_changes_beyond_the_threshold(fitted_demo))


async def _value_changes_beyond_the_threshold(fitted_demo: Path) -> None:
    # Finding: "136 parcels change beyond the review threshold" with no way to see which.
    limit = load_config(fitted_demo).assessment.review_change_threshold
    beyond = query_frame(fitted_demo, """SELECT v.parcel_id, abs(v.market_value / v.prior_value - 1) AS size
                                         FROM roll_values v JOIN batches b USING (batch_id)
                                         WHERE b.state = 'staged' AND v.prior_value > 0
                                           AND abs(v.market_value / v.prior_value - 1) > ?
                                         ORDER BY size DESC, v.parcel_id""", [limit])
    assert len(beyond) > PAGE                                     # more than one page in the demo
    app = RevalApp(fitted_demo)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("C")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, ListScreen) and screen.data is not None
        assert screen.data["total"] == len(beyond) and screen.data["pages"] == -(-len(beyond) // PAGE)
        rows = table_rows(screen.query_one("#list-table"))
        assert [r[0] for r in rows] == list(beyond["parcel_id"][:PAGE])   # largest changes first
        await pilot.press("right_square_bracket")                    # the next page, from SQL
        await settle(pilot)
        assert [r[0] for r in table_rows(screen.query_one("#list-table"))] == list(beyond["parcel_id"][PAGE:2 * PAGE])
        await pilot.press("r")                                        # smallest changes beyond the limit first
        await settle(pilot)
        assert table_rows(screen.query_one("#list-table"))[0][0] == beyond["parcel_id"].iloc[-1]
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, ParcelScreen) and app.screen.parcel_id == beyond["parcel_id"].iloc[-1]


def test_excluded_and_down_weighted_sales_with_why(fitted_demo: Path) -> None:
    asyncio.run(_excluded_and_down_weighted_sales_with_why(fitted_demo))


async def _excluded_and_down_weighted_sales_with_why(fitted_demo: Path) -> None:
    # Finding: the excluded sales and their reasons were not reachable in the app.
    excluded = query_frame(fitted_demo, "SELECT sale_id, reason FROM sale_qualification WHERE NOT qualified")
    light = query_frame(fitted_demo, "SELECT count(*) AS n FROM sale_weights WHERE weight < 1")["n"].iloc[0]
    reason = excluded["reason"].iloc[0]
    app = RevalApp(fitted_demo)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await pilot.press("E")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, ListScreen) and screen.data is not None
        assert screen.data["total"] == len(excluded) + light
        await pilot.press("slash")                                    # filter by a reason's words, in SQL
        await type_text(pilot, reason)
        await pilot.press("enter")
        await settle(pilot)
        assert screen.data["total"] == int((excluded["reason"] == reason).sum()) + int(
            query_frame(fitted_demo, "SELECT count(*) AS n FROM sale_weights WHERE weight < 1 AND "
                                     "contains(lower(reason), lower(?))", [reason])["n"].iloc[0])
        assert all(reason.lower() in " ".join(r).lower() for r in table_rows(screen.query_one("#list-table")))


def test_audit_log_by_segment(demo_copy: Path) -> None:
    asyncio.run(_audit_log_by_segment(demo_copy))


async def _audit_log_by_segment(demo_copy: Path) -> None:
    # Finding: the audit log was not reachable in the app. In a drill-in, L shows that segment's events.
    segment = views.overview(demo_copy)["segments"][0]["segment"]
    actions.hold(demo_copy, segment, "check the lots")
    events = actions.event_log(demo_copy, segment)["events"]
    app = RevalApp(demo_copy)
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        await open_segment(pilot, segment)
        await pilot.press("L")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, ListScreen) and screen.data is not None
        rows = table_rows(screen.query_one("#list-table"))
        assert [int(r[0]) for r in rows] == sorted((e["event_id"] for e in events), reverse=True)
        assert rows[0][3] == "batch_held" and rows[0][6].startswith("note: check the lots")
        await pilot.press("e")                                        # every segment: the whole log
        await pilot.press(*["backspace"] * len(segment), "enter")
        await settle(pilot)
        assert screen.data["total"] == len(actions.event_log(demo_copy)["events"])
        await pilot.press("enter")                                    # a row opens its segment
        await settle(pilot)
        assert isinstance(app.screen, SegmentScreen)


def test_a_segments_parcels_and_every_sale_are_browsed_sorted_and_filtered(fitted_demo: Path) -> None:
    asyncio.run(_parcels_and_every_sale(fitted_demo))


async def _parcels_and_every_sale(fitted_demo: Path) -> None:
    # Findings: browsing a segment's parcels, and sorting or filtering the sales table, were not in the app.
    segment = views.overview(fitted_demo)["segments"][0]["segment"]
    parcels = query_frame(fitted_demo, """SELECT p.parcel_id, v.market_value FROM parcels p
                                          LEFT JOIN roll_values v ON v.parcel_id = p.parcel_id AND v.batch_id IN
                                              (SELECT batch_id FROM batches WHERE state = 'staged')
                                          WHERE p.segment = ? ORDER BY v.market_value DESC NULLS LAST, p.parcel_id""",
                          [segment])
    sales = query_frame(fitted_demo, """SELECT x.sale_id, x.sale_price, q.qualified FROM sales x
                                        JOIN parcels p USING (parcel_id)
                                        JOIN sale_qualification q ON q.sale_id = x.sale_id AND q.parcel_id = x.parcel_id
                                        WHERE p.segment = ?""", [segment])
    app = RevalApp(fitted_demo)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await open_segment(pilot, segment)
        await pilot.press("P")                                         # this segment's parcels
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, ListScreen) and screen.data is not None and screen.data["segment"] == segment
        assert screen.data["total"] == len(parcels)
        for _ in range(len(screen.data["columns"])):                  # s: next column, until the value
            if screen.data["sort"] == "market_value":
                break
            await pilot.press("s")
            await settle(pilot)
        await pilot.press("r")                                        # largest first
        await settle(pilot)
        assert [r["parcel_id"] for r in screen.data["rows"]] == list(parcels["parcel_id"][:PAGE])
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, ParcelScreen) and app.screen.parcel_id == parcels["parcel_id"].iloc[0]
        assert [type(s).__name__ for s in app.screen_stack][-3:] == ["SegmentScreen", "ListScreen", "ParcelScreen"]
        await pilot.press("escape", "escape")
        await settle(pilot)
        assert isinstance(app.screen, SegmentScreen), app.screen_stack
        await pilot.press("U")                                        # this segment's sales, every one
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, ListScreen) and screen.data is not None and screen.data["total"] == len(sales)
        await pilot.press("slash")
        await type_text(pilot, "excluded")
        await pilot.press("enter")
        await settle(pilot)
        assert screen.data["total"] == int((~sales["qualified"]).sum()) > 0
        assert all(r["status"] == "excluded" and r["reason"] for r in screen.data["rows"])
        await pilot.press("slash", "escape")                          # the filter goes, every sale is back
        await settle(pilot)
        assert app.screen is screen and screen.data["total"] == len(sales)
        for _ in range(len(screen.data["columns"])):
            if screen.data["sort"] == "sale_price":
                break
            await pilot.press("s")
            await settle(pilot)
        prices = [r["sale_price"] for r in screen.data["rows"]]
        assert prices == sorted(sales["sale_price"])[:len(prices)]
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, ParcelScreen)
