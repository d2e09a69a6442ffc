"""A corpus of bad input files, generated here from the small test township: each is refused with its file,
physical line and column named, and the database stays exactly as it was (content and bytes).

Each case changes one file of a project that already holds a good data set: the parcels file (header on
line 1; rows 00101..00105 on lines 2..6) or the sales file (S1..S4 on lines 2..6). Cases come from the
issue's findings (unterminated quote, NUL byte, repeated column name, ragged row, line numbers after a
quoted line break, NaN and infinities, absurd prices, BC and special dates, a header-only file) plus
encodings, a byte-order mark, other delimiters, huge numbers and mixed types.
"""
from __future__ import annotations

import shutil
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pytest

from helpers import SMALL_CONFIG, SMALL_PARCELS, SMALL_SALES, database_content, query_frame, write_project
from reval.errors import DataErrors
from reval.service.actions import import_data

Edit = Callable[[bytes], bytes]


def swap(old: str, new: str) -> Edit:
    def edit(data: bytes) -> bytes:
        assert old.encode() in data, old
        return data.replace(old.encode(), new.encode(), 1)
    return edit


def raw(old: bytes, new: bytes) -> Edit:
    def edit(data: bytes) -> bytes:
        assert old in data, old
        return data.replace(old, new, 1)
    return edit


def whole(make: Callable[[str], bytes]) -> Edit:
    return lambda data: make(data.decode())


@dataclass(frozen=True)
class Case:
    name: str
    file: str
    edit: Edit
    line: int
    column: str
    reason: str


PARCELS, SALES = "parcels.csv", "sales.csv"
CASES = [
    # structure (reval.data.csv_scan)
    Case("unterminated quote", PARCELS, swap("00102,north", '00102,"north'), 3, "nbhd", "unterminated quote"),
    Case("quote inside a value", PARCELS, swap("00103,south", '00103,so"uth'), 4, "nbhd", "quote inside a value"),
    Case("text after a closing quote", PARCELS, swap("00103,south", '00103,"so"uth'), 4, "nbhd", "after the closing quote"),
    Case("NUL byte", PARCELS, raw(b"00104,east", b"00104,ea\x00st"), 5, "nbhd", "NUL byte"),
    Case("repeated column name", PARCELS, whole(lambda t: "\n".join(
        line + (",nbhd" if i == 0 else ",x") for i, line in enumerate(t.splitlines())).encode()), 1, "nbhd",
        "column name repeated"),
    Case("row with a value too many", PARCELS, swap("750,average,no", "750,average,no,extra"), 5, "(value 9)",
         "9 values on this row, the header has 8"),
    Case("row with a value missing", SALES, swap("S3,00104,2023-11-30,140000,family", "S3,00104,2023-11-30,140000"),
         4, "code", "4 values on this row, the header has 5"),
    Case("line numbers after a quoted line break", PARCELS,    # row 00101 spans lines 2-3, so 00102 is on line 4
         lambda d: swap("1800,good", "1800,superb")(swap("00101,north,A,single_family", '00101,north,A,"single\nfamily"')(d)),
         4, "quality", "unknown level"),
    Case("line numbers after a blank line", PARCELS, lambda d: swap("900,low", "900,lowest")(swap("00103,", "\n00103,")(d)),
         5, "quality", "unknown level"),
    Case("UTF-16 file", PARCELS, lambda d: d.decode().encode("utf-16"), 1, "(file)", "UTF-16"),
    Case("Latin-1 byte", PARCELS, raw(b"00103,south", b"00103,s\xe9ville"), 4, "nbhd", "not UTF-8"),
    Case("semicolons", PARCELS, lambda d: d.replace(b",", b";"), 1, "pid;nbhd;area;class;prior;sqft;quality;garage",
         "separated by ';'"),
    Case("tabs", SALES, lambda d: d.replace(b",", b"\t"), 1, "sale_id\tpid\tdate\tprice\tcode", "separated by '\\t'"),
    Case("header only: parcels", PARCELS, lambda d: d.split(b"\n")[0] + b"\n", 2, "(line)", "no data rows"),
    Case("header only: sales", SALES, lambda d: d.split(b"\n")[0] + b"\n", 2, "(line)", "no data rows"),
    Case("empty file", SALES, lambda d: b"", 1, "(file)", "the file is empty"),
    # cells (sql/queries/import_problems.sql)
    Case("NaN prior value", PARCELS, swap("150000,1200", "nan,1200"), 2, "prior", "not a finite number"),
    Case("infinite prior value", PARCELS, swap("150000,1200", "inf,1200"), 2, "prior", "not a finite number"),
    Case("-Infinity prior value", PARCELS, swap("150000,1200", "-Infinity,1200"), 2, "prior", "not a finite number"),
    Case("NaN sale price", SALES, swap("2024-06-15,260000", "2024-06-15,NaN"), 3, "price", "not a finite number"),
    Case("sale price 1e308", SALES, swap("2024-06-15,260000", "2024-06-15,1e308"), 3, "price", "beyond the largest"),
    Case("sale price beyond a double", SALES, swap("2024-06-15,260000", "2024-06-15,1e400"), 3, "price",
         "not a finite number"),
    Case("huge prior value", PARCELS, swap("150000,1200", "123456789012345,1200"), 2, "prior", "beyond the largest"),
    Case("NaN feature", PARCELS, swap("1800,good", "NaN,good"), 3, "sqft", "not a finite number"),
    Case("BC date", SALES, swap("2024-03-01", "-2023-01-01"), 2, "date", "not a date"),
    Case("'epoch' as a date", SALES, swap("2024-03-01", "epoch"), 2, "date", "not a date"),
    Case("'-infinity' as a date", SALES, swap("2024-03-01", "-infinity"), 2, "date", "not a date"),
    Case("date before 1800", SALES, swap("2024-03-01", "1799-12-31"), 2, "date", "outside 1800-01-01 to 2026-01-01"),
    Case("date beyond the valuation date plus a year", SALES, swap("2024-03-01", "2026-01-02"), 2, "date",
         "outside 1800-01-01"),
    Case("money with a currency sign", SALES, swap("2024-06-15,260000", '2024-06-15,"$260,000"'), 3, "price",
         "not a number"),
    Case("decimal comma", PARCELS, swap("150000,1200", '"150000,50",1200'), 2, "prior", "not a number"),
    Case("units in a number", PARCELS, swap("1800,good", "1800 sqft,good"), 3, "sqft", "not a number"),
    Case("count in a yes/no column", PARCELS, swap("900,low,yes", "900,low,2"), 4, "garage", "not a yes/no value"),
    Case("id with a leading tab is the same parcel", PARCELS, lambda d: d + b'"\t00101",west,C,single_family,1,900,low,0\n',
         7, "pid", "duplicate parcel id (first on line 2)"),
    Case("id of white space only", PARCELS, swap("00102,north", '" \t",north'), 3, "pid", "missing parcel id"),
]


@pytest.fixture(scope="module")
def good(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The small township imported from good files."""
    folder = write_project(tmp_path_factory.mktemp("good") / "p")
    import_data(folder)
    return folder


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_a_bad_input_is_refused_by_file_line_and_column_and_changes_nothing(good: Path, tmp_path: Path,
                                                                            case: Case) -> None:
    folder = Path(shutil.copytree(good, tmp_path / "p"))
    database = folder / "reval.duckdb"
    before, before_bytes = database_content(database), database.read_bytes()
    path = folder / case.file
    path.write_bytes(case.edit(path.read_bytes()))
    with pytest.raises(DataErrors) as caught:
        import_data(folder)
    named = [p for p in caught.value.problems if p.file.endswith(case.file) and p.line == case.line
             and p.column == case.column and case.reason in p.reason]
    assert named, [str(p) for p in caught.value.problems]
    assert f"{case.file}, line {case.line}, column '{case.column}'" in str(caught.value)
    assert database_content(database) == before
    assert database.read_bytes() == before_bytes


def test_a_utf8_byte_order_mark_is_read_as_text(tmp_path: Path) -> None:
    folder = write_project(tmp_path / "p", parcels="\ufeff" + SMALL_PARCELS, sales="\ufeff" + SMALL_SALES)
    assert import_data(folder)["parcels"] == 5
    assert query_frame(folder, "SELECT min(parcel_id) AS first FROM parcels")["first"][0] == "00101"


def test_empty_files_are_imported_only_when_allowed(good: Path, tmp_path: Path) -> None:
    """Issue finding: a header-only parcels or sales file wiped the data set (exit 0)."""
    folder = Path(shutil.copytree(good, tmp_path / "p"))
    for name in (PARCELS, SALES):
        path = folder / name
        path.write_text(path.read_text().splitlines()[0] + "\n")
    with pytest.raises(DataErrors):
        import_data(folder)
    assert import_data(folder, allow_empty=True)["parcels"] == 0


def test_a_feature_without_a_declared_range_still_refuses_infinity(tmp_path: Path) -> None:
    """Issue finding: features nan/-inf were accepted where no range is declared."""
    config = SMALL_CONFIG.replace("range = [200, 8000]\n", "")
    folder = write_project(tmp_path / "p", config=config, parcels=SMALL_PARCELS.replace("1800,good", "-inf,good"))
    with pytest.raises(DataErrors, match=r"line 3, column 'sqft': not a finite number"):
        import_data(folder)
