"""Repeat sales of one parcel in the sale window: the latest qualifying sale is used, the earlier ones are left
out with their reason (configurable), and `reval sales` lists them."""
from __future__ import annotations

import json
from pathlib import Path

from helpers import query_frame, run_reval, set_section, write_check_project
from reval.service import actions


def _reasons(folder: Path) -> dict[str, str | None]:
    frame = query_frame(folder, "SELECT sale_id, coalesce(reason, 'qualified') AS reason FROM sale_qualification")
    return {r.sale_id: None if r.reason == "qualified" else r.reason for r in frame.itertuples()}


def _prepared(folder: Path) -> Path:
    actions.import_data(folder)
    actions.prepare_sales(folder)
    return folder


def test_the_latest_sale_of_a_parcel_is_used_and_earlier_ones_are_left_out(tmp_path: Path) -> None:
    folder = _prepared(write_check_project(tmp_path / "p"))
    reasons = _reasons(folder)
    # P20 sold 2023-06-01 (T20a) and 2024-06-01 (T20b): only the later one counts
    assert reasons["T20b"] is None and reasons["T20a"] == "earlier repeat sale"
    # P19 sold twice on 2024-02-01 (T19a, T19b): one of the two is kept (the larger id), the other is a duplicate
    assert reasons["T19b"] is None and reasons["T19a"] == "duplicate sale (same parcel and day)"
    # single sales are untouched
    assert all(reasons[s] is None for s in ("T01", "T10", "T16", "U01"))
    adjusted = set(query_frame(folder, "SELECT sale_id FROM adjusted_sales")["sale_id"])
    assert {"T20b", "T19b"} <= adjusted and not {"T20a", "T19a"} & adjusted


def test_keeping_every_repeat_sale_is_a_setting(tmp_path: Path) -> None:
    folder = write_check_project(tmp_path / "p")
    set_section(folder, "sales", 'validity_codes_kept = ["valid"]\nrepeat_sales = "all"\n')
    reasons = _reasons(_prepared(folder))
    assert reasons["T20a"] is None and reasons["T20b"] is None and reasons["T19a"] is None


def test_excluding_the_latest_sale_brings_back_the_earlier_one(tmp_path: Path) -> None:
    # the rule picks the latest sale that passes every other rule, the analyst's decisions included
    folder = _prepared(write_check_project(tmp_path / "p"))
    actions.decide_sale(folder, "T20b", "exclude", "sold to a relative")
    reasons = _reasons(folder)
    assert reasons["T20b"] == "excluded by analyst: sold to a relative" and reasons["T20a"] is None


def test_reval_sales_lists_the_repeat_sales(tmp_path: Path) -> None:
    folder = write_check_project(tmp_path / "p")
    actions.import_data(folder)
    listed = json.loads(run_reval("sales", "--json", "--project", str(folder)).stdout)["repeat_sales"]
    assert {(r["parcel_id"], r["sale_id"], r["qualified"]) for r in listed} == {
        ("P19", "T19a", False), ("P19", "T19b", True), ("P20", "T20a", False), ("P20", "T20b", True)}
    out = run_reval("sales", "--project", str(folder), columns=160).stdout
    assert "Repeat sales" in out and "T20a" in out and "earlier repeat sale" in out
