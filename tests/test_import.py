"""Validated, all-or-nothing import on small real projects (real DuckDB files in tmp_path)."""
from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import duckdb
import pytest

from helpers import SMALL_CONFIG, SMALL_PARCELS, SMALL_SALES, database_content, write_project
from reval.data.config import load_config
from reval.errors import ConfigError, DataErrors
from reval.data.importer import ERROR_REPORT, run_import

TODAY = dt.date(2025, 6, 1)


def _import(folder: Path):
    return run_import(load_config(folder), today=TODAY)


def test_clean_import_loads_every_row(small_project: Path) -> None:
    result = _import(small_project)
    assert (result.changed, result.parcels, result.sales, result.segments, result.market_areas) == (True, 5, 5, 3, 2)
    con = duckdb.connect(str(small_project / "reval.duckdb"), read_only=True)
    # Parcel ids stay text with their leading zeros.
    assert [r[0] for r in con.execute("SELECT parcel_id FROM parcels ORDER BY parcel_id").fetchall()] == \
        ["00101", "00102", "00103", "00104", "00105"]
    # Ordinal levels become 0-based codes in declared order; yes/no and 1/0 become 1.0/0.0.
    rows = con.execute("SELECT f.name, v.value FROM feature_values v JOIN features f USING (position) "
                       "WHERE parcel_id = '00103' ORDER BY f.position").fetchall()
    assert rows == [("living_area", 900.0), ("quality", 0.0), ("garage", 1.0)]
    assert con.execute("SELECT prior_value FROM parcels WHERE parcel_id = '00105'").fetchone() == (None,)
    # The multi-parcel sale S4 is kept as two rows sharing one sale id.
    assert con.execute("SELECT count(*) FROM sales WHERE sale_id = 'S4'").fetchone() == (2,)
    kinds = con.execute("SELECT kind, detail->>'$.counts.parcels' FROM events").fetchall()
    assert kinds == [("import", "5")]
    con.close()


def test_reimport_of_identical_files_changes_nothing(small_project: Path) -> None:
    _import(small_project)
    before = database_content(small_project / "reval.duckdb")
    again = _import(small_project)
    assert again.changed is False
    assert database_content(small_project / "reval.duckdb") == before


def test_new_files_replace_the_data_set_and_record_hashes(small_project: Path) -> None:
    _import(small_project)
    (small_project / "sales.csv").write_text(SMALL_SALES.replace("180000", "185000"), encoding="utf-8")
    result = _import(small_project)
    assert result.changed
    con = duckdb.connect(str(small_project / "reval.duckdb"), read_only=True)
    assert con.execute("SELECT sale_price FROM sales WHERE sale_id = 'S1'").fetchone() == (185000.0,)
    events = con.execute("SELECT detail->>'$.files.sales' FROM events ORDER BY event_id").fetchall()
    con.close()
    import hashlib

    assert len(events) == 2
    assert events[1][0] == hashlib.sha256((small_project / "sales.csv").read_bytes()).hexdigest()


BAD_CASES = [
    # (file, original text, replacement, expected line, expected column, reason fragment)
    ("parcels.csv", "00102,north", ",north", 3, "pid", "missing parcel id"),
    ("parcels.csv", "00103,south", "00101,south", 4, "pid", "duplicate parcel id (first on line 2)"),
    ("parcels.csv", "150000,1200", "abc,1200", 2, "prior", "not a number"),
    ("parcels.csv", "1800,good", "1.8k,good", 3, "sqft", "not a number"),
    ("parcels.csv", "900,low", "90000,low", 4, "sqft", "outside the declared range"),
    ("parcels.csv", "1800,good", "1800,superb", 3, "quality", "unknown level"),
    ("parcels.csv", "750,average,no", "750,average,maybe", 5, "garage", "not a yes/no value"),
    ("parcels.csv", "00104,east,B", "00104,east,A", 5, "area", "more than one market area"),
    ("sales.csv", "S2,00102", "S2,00999", 3, "pid", "not in the parcels file"),
    ("sales.csv", "2024-06-15,260000", "2024-06-15,-5", 3, "price", "must be positive"),
    ("sales.csv", "2024-06-15,260000", "2024-06-15,lots", 3, "price", "not a number"),
    ("sales.csv", "2024-03-01", "2024-13-01", 2, "date", "not a date"),
    ("sales.csv", "2024-03-01", "2025-09-01", 2, "date", "in the future"),
    ("sales.csv", "S4,00103,2024-09-01,155000", "S4,00103,2024-09-01,999000", 6, "sale_id", "disagree"),
    ("sales.csv", "S2,00102", "S1,00101", 3, "sale_id", "listed twice"),
]


@pytest.mark.parametrize("file,old,new,line,column,reason", BAD_CASES)
def test_each_bad_input_is_named_and_leaves_the_database_unchanged(
        small_project: Path, file: str, old: str, new: str, line: int, column: str, reason: str) -> None:
    _import(small_project)  # a good data set first: a failed import must leave it exactly as it was
    database = small_project / "reval.duckdb"
    before = database_content(database)
    path = small_project / file
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    with pytest.raises(DataErrors) as caught:
        _import(small_project)
    problems = caught.value.problems
    assert any(p.line == line and p.column == column and reason in p.reason and p.file.endswith(file)
               for p in problems), [str(p) for p in problems]
    assert database_content(database) == before
    with (small_project / ERROR_REPORT).open(newline="", encoding="utf-8") as handle:
        report = list(csv.DictReader(handle))
    assert any(r["line"] == str(line) and r["column"] == column and reason in r["reason"] for r in report)


def test_every_problem_is_reported_at_once(small_project: Path) -> None:
    parcels = SMALL_PARCELS.replace("1800,good", "abc,great").replace("00103,south", ",south")
    sales = SMALL_SALES.replace("2024-03-01,180000", "someday,0")
    write_project(small_project, parcels=parcels, sales=sales)
    with pytest.raises(DataErrors) as caught:
        _import(small_project)
    found = {(p.line, p.column) for p in caught.value.problems}
    assert {(3, "sqft"), (3, "quality"), (4, "pid"), (2, "date"), (2, "price")} <= found
    assert not (small_project / "reval.duckdb").exists() or database_content(small_project / "reval.duckdb")["parcels"] == []
    message = str(caught.value)
    assert "line 3, column 'quality'" in message and "database is unchanged" in message


def test_a_successful_import_removes_a_stale_error_report(small_project: Path) -> None:
    (small_project / ERROR_REPORT).write_text("old", encoding="utf-8")
    _import(small_project)
    assert not (small_project / ERROR_REPORT).exists()


def test_missing_column_names_file_key_and_column(small_project: Path) -> None:
    (small_project / "parcels.csv").write_text(SMALL_PARCELS.replace("sqft", "area_sqft"), encoding="utf-8")
    with pytest.raises(ConfigError) as caught:
        _import(small_project)
    message = str(caught.value)
    assert "reval.toml" in message and "features (living_area).column" in message and "'sqft'" in message
    assert "parcels.csv" in message


def test_one_file_holding_parcels_and_sales(tmp_path: Path) -> None:
    config = SMALL_CONFIG.replace('sales = "sales.csv"\n', "")
    combined = ("pid,nbhd,area,class,prior,sqft,quality,garage,sale_id,date,price,code\n"
                "001,north,A,single_family,1,1000,low,0,a,2024-01-01,100000,valid\n"
                "002,north,A,single_family,1,1100,low,0,,,,\n")
    folder = write_project(tmp_path / "p", config=config, parcels=combined)
    result = _import(folder)
    assert (result.parcels, result.sales) == (2, 1)


def test_parquet_input(tmp_path: Path, small_project: Path) -> None:
    con = duckdb.connect()
    for name in ("parcels", "sales"):
        con.execute(f"COPY (SELECT * FROM read_csv('{small_project / name}.csv', all_varchar=true)) "
                    f"TO '{small_project / name}.parquet' (FORMAT parquet)")
    config = (small_project / "reval.toml").read_text().replace(".csv", ".parquet")
    (small_project / "reval.toml").write_text(config)
    result = _import(small_project)
    assert (result.parcels, result.sales) == (5, 5)


def test_line_numbers_hold_on_a_large_file(tmp_path: Path) -> None:
    """DuckDB reads big CSVs in parallel; the reported line must still be the file's own line."""
    n = 120_000
    rows = "".join(f"{i:07d},n{i % 7},A,single_family,100000,{1000 + i % 500},average,1\n" for i in range(n))
    bad_line = 98_765
    lines = rows.splitlines(keepends=True)
    lines[bad_line - 2] = lines[bad_line - 2].replace(",average,", ",superb,")
    parcels = "pid,nbhd,area,class,prior,sqft,quality,garage\n" + "".join(lines)
    sales = "sale_id,pid,date,price,code\nS1,0000001,2024-03-01,180000,valid\n"
    folder = write_project(tmp_path / "big", parcels=parcels, sales=sales)
    with pytest.raises(DataErrors) as caught:
        _import(folder)
    assert [(p.line, p.column, p.value) for p in caught.value.problems] == [(bad_line, "quality", "superb")]
