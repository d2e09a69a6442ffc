"""`reval check`: the data-quality report before fitting, on a small project with one planted case of every check
(tests/helpers.py, write_check_project) and on the shipped small project. Everything is read from a real database;
the check itself writes nothing."""
from __future__ import annotations

import csv
import json
import shutil
from collections import Counter
from pathlib import Path

import pytest

from helpers import (CLEAN, PLANTED, database_content, run_reval, set_section, write_check_project,
                     write_project)
from reval.data.check import CHECKS
from reval.errors import UserError
from reval.service import actions, views


@pytest.fixture(scope="module")
def checked(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The planted project, imported and its sales prepared (module-wide: the tests here only read it)."""
    folder = write_check_project(tmp_path_factory.mktemp("check") / "p")
    actions.import_data(folder)
    actions.prepare_sales(folder)
    return folder


def _all_rows(folder: Path, **filters: str) -> list[dict]:
    first = views.check_rows(folder, page=0, page_size=1000, **filters)
    assert first["pages"] == 1
    return first["rows"]


def _found(rows: list[dict]) -> set[tuple[str, str, str | None]]:
    return {(r["parcel_id"], r["code"], r["feature"]) for r in rows}


def test_every_planted_case_is_found_and_clean_parcels_raise_nothing(checked: Path) -> None:
    rows = _all_rows(checked)
    found = _found(rows)
    assert PLANTED <= found, PLANTED - found
    assert not [r for r in rows if r["parcel_id"] in CLEAN]
    assert {code for _, code, _ in found} == set(CHECKS) - {"beyond_range"}  # the range is as imported
    by_code = {(r["parcel_id"], r["code"]): r for r in rows}
    assert by_code[("P13", "area_per_bathroom")]["value"] == "4" and "75" in by_code[("P13", "area_per_bathroom")]["problem"]
    assert by_code[("P16", "built_after_sale")]["sale_id"] == "T16"
    assert by_code[("P17", "price_per_area")]["sale_id"] == "T17"
    assert by_code[("P21", "beyond_sold")]["value"] == "good" and by_code[("P22", "beyond_sold")]["value"] == "yes"
    assert by_code[("P11", "missing")]["value"] is None and "blank" in by_code[("P11", "missing")]["problem"]
    # both sales of each repeated parcel are listed, the earlier one with what the sales step did with it
    repeats = {r["sale_id"]: r["problem"] for r in rows if r["code"] in ("repeat_sale", "duplicate_sale")}
    assert set(repeats) == {"T19a", "T19b", "T20a", "T20b"}
    assert "earlier repeat sale" in repeats["T20a"] and "latest" in repeats["T20b"]


def test_a_tightened_range_lists_the_values_the_next_import_would_refuse(checked: Path, tmp_path: Path) -> None:
    folder = Path(shutil.copytree(checked, tmp_path / "p"))
    config = (folder / "reval.toml").read_text()
    (folder / "reval.toml").write_text(config.replace("range = [200, 8000]", "range = [250, 8000]"))
    beyond = _all_rows(folder, code="beyond_range")
    assert [(r["parcel_id"], r["feature"], r["value"]) for r in beyond] == [("P23", "living_area", "210")]
    assert "250" in beyond[0]["problem"]


def test_counts_per_segment_and_check_match_the_rows(checked: Path) -> None:
    report = actions.check_data(checked)
    rows = _all_rows(checked)
    counted = Counter((r["segment"], r["code"]) for r in rows)
    assert {(s["segment"], code): n for s in report["segments"] for code, n in s["counts"].items() if n} == counted
    north = next(s for s in report["segments"] if s["segment"] == "north")
    assert north["parcels"] == 23 and north["sold_parcels"] == 15 and north["problems"] == sum(north["counts"].values())
    assert report["totals"] == dict(Counter(r["code"] for r in rows))
    assert report["basis"] == "qualified sales" and report["not_run"] == []
    assert set(report["checks"]) == set(CHECKS)


def test_the_check_writes_nothing_to_the_database(checked: Path) -> None:
    before = database_content(checked / "reval.duckdb")
    actions.check_data(checked)
    views.check_rows(checked, page=0, page_size=5)
    assert database_content(checked / "reval.duckdb") == before


def test_the_csv_holds_every_row_with_a_readable_problem(checked: Path, tmp_path: Path) -> None:
    out = tmp_path / "check.csv"
    done = run_reval("check", "--csv", str(out), "--project", str(checked), "--json")
    assert done.returncode == 0, done.stderr
    result = json.loads(done.stdout)
    with out.open(newline="", encoding="utf-8") as handle:
        reader = csv.DictReader(handle)
        assert reader.fieldnames == ["parcel_id", "sale_id", "segment", "check", "feature", "value", "problem"]
        rows = list(reader)
    assert result["csv"] == {"path": str(out), "rows": len(rows)}
    assert {(r["parcel_id"], r["check"], r["feature"] or None) for r in rows} >= PLANTED
    assert len(rows) == sum(result["totals"].values()) and all(r["problem"] for r in rows)
    missing = next(r for r in rows if r["check"] == "missing")
    assert missing["parcel_id"] == "P11" and missing["value"] == "" and missing["sale_id"] == ""


def test_the_csv_never_lands_on_a_project_file(checked: Path) -> None:
    before = (checked / "parcels.csv").read_bytes()
    with pytest.raises(UserError, match="project's own files"):
        actions.check_data(checked, csv_path=checked / "parcels.csv")
    assert (checked / "parcels.csv").read_bytes() == before


def test_the_screen_shows_counts_per_segment(checked: Path) -> None:
    done = run_reval("check", "--project", str(checked), columns=200)
    assert done.returncode == 0, done.stderr
    assert "north" in done.stdout and "south" in done.stdout and "repeat_sale" in done.stdout
    assert "--csv" in done.stdout          # says how to get the rows


def test_rows_are_paged_sorted_and_filtered_in_sql(checked: Path) -> None:
    whole = _all_rows(checked, sort="code")
    assert [r["code"] for r in whole] == sorted(r["code"] for r in whole)
    pages = [views.check_rows(checked, page=p, page_size=4, sort="code") for p in range(0, 20)]
    assert pages[0]["pages"] == -(-len(whole) // 4) and pages[0]["total"] == len(whole)
    joined = [r for p in pages[: pages[0]["pages"]] for r in p["rows"]]
    assert joined == whole
    assert pages[-1]["page"] == pages[0]["pages"] - 1      # a page beyond the end shows the last one
    south = _all_rows(checked, segment="south")
    assert south == [] and views.check_rows(checked, page=0, page_size=5, segment="south")["total"] == 0
    sold = _all_rows(checked, code="beyond_sold")
    assert {r["code"] for r in sold} == {"beyond_sold"} and len(sold) == report_total(checked, "beyond_sold")


def report_total(folder: Path, code: str) -> int:
    return actions.check_data(folder)["totals"].get(code, 0)


def test_before_the_sales_step_the_sold_range_comes_from_the_window(tmp_path: Path) -> None:
    folder = write_check_project(tmp_path / "p")
    actions.import_data(folder)
    report = actions.check_data(folder)
    assert report["basis"] == "sales in the sale window"
    assert PLANTED <= _found(_all_rows(folder))


def test_checks_that_need_a_missing_feature_say_they_did_not_run(tmp_path: Path) -> None:
    folder = write_project(tmp_path / "small")      # living area, quality, garage: no bathrooms, no year built
    actions.import_data(folder)
    report = actions.check_data(folder)
    not_run = {n["check"]: n["reason"] for n in report["not_run"]}
    assert set(not_run) == {"area_per_bathroom", "no_bathroom", "built_after_valuation", "built_after_sale"}
    assert "bathrooms" in not_run["no_bathroom"] and "[check]" in not_run["no_bathroom"]
    set_section(folder, "check", 'bathrooms = "garage"\n')   # a feature of the wrong kind is named, not used
    not_run = {n["check"]: n["reason"] for n in actions.check_data(folder)["not_run"]}
    assert "binary" in not_run["no_bathroom"]


def test_one_segment_checked_alone_gives_the_rows_it_gets_among_all(checked: Path, tmp_path: Path) -> None:
    # the app builds the check for the segment it shows; the rows must not depend on that
    out = tmp_path / "all.csv"
    actions.check_data(checked, csv_path=out)
    with out.open(newline="", encoding="utf-8") as handle:
        north = [(r["parcel_id"], r["sale_id"] or None, r["check"], r["feature"] or None, r["value"] or None,
                  r["problem"]) for r in csv.DictReader(handle) if r["segment"] == "north"]
    alone = [(r["parcel_id"], r["sale_id"], r["code"], r["feature"], r["value"], r["problem"])
             for r in _all_rows(checked, segment="north")]
    assert alone == north and len(alone) > len(PLANTED)


def test_the_demo_keying_errors_are_listed_before_any_fit(demo_project: Path) -> None:
    # The sales issue 10 quotes from the demo: a 304 sq ft house sold for 533,200 (S0000044, parcel 0061148)
    # and the sales with out-of-fold ratios 9.68 (S0002410) and 0.106 (S0000174): all listed by the check.
    rows = _all_rows(demo_project, segment="MARW") + _all_rows(demo_project, segment="TAML") \
        + _all_rows(demo_project, segment="QUOR")
    priced = {r["sale_id"] for r in rows if r["code"] == "price_per_area"}
    assert {"S0000044", "S0002410", "S0000174"} <= priced
    assert ("0061148", "area_per_bathroom") in {(r["parcel_id"], r["code"]) for r in rows}


def test_a_reimport_since_the_sales_step_falls_back_to_the_window(checked: Path, tmp_path: Path) -> None:
    # a new sale imported after `reval sales` has no qualification yet: the check must not treat the stored
    # qualification as current (the new sale's parcel would silently not count as sold)
    folder = Path(shutil.copytree(checked, tmp_path / "p"))
    with (folder / "sales.csv").open("a", encoding="utf-8") as handle:
        handle.write("T99,S03,2024-10-01,230000,valid\n")
    actions.import_data(folder)
    report = actions.check_data(folder)
    assert report["basis"] == "sales in the sale window"
    assert next(s for s in report["segments"] if s["segment"] == "south")["sold_parcels"] == 3
