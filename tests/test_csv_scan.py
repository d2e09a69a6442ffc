"""The CSV structure check against Python's csv module (the reference reader): any table that csv.writer
writes passes with the right row count and the physical line of every row, also when the file is read in
blocks so small that quotes and line breaks straddle them."""
from __future__ import annotations

import csv
import io
import tempfile
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from reval.data import csv_scan

FIELD = st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00\r"), max_size=8)


def _scan(text: str, block: int) -> csv_scan.CsvLayout:
    saved = csv_scan.BLOCK
    csv_scan.BLOCK = block
    try:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "t.csv"
            path.write_text(text, encoding="utf-8", newline="")
            return csv_scan.scan_csv(path)
    finally:
        csv_scan.BLOCK = saved


@settings(max_examples=60, deadline=None)
@given(st.integers(2, 5).flatmap(lambda k: st.lists(st.lists(FIELD, min_size=k, max_size=k), min_size=1, max_size=30)),
       st.sampled_from([1, 3, 7, 64, 1 << 23]))
def test_any_table_csv_writes_passes_with_its_physical_lines(rows: list[list[str]], block: int) -> None:
    header = [f"c{i}" for i in range(len(rows[0]))]
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows([header, *rows])
    text = out.getvalue()
    reader = csv.reader(io.StringIO(text))
    starts, last = [], 0
    for _ in reader:
        starts.append(last + 1)
        last = reader.line_num
    layout = _scan(text, block)
    assert layout.problems == []
    assert layout.header == header and layout.rows == len(rows)
    lines = list(range(2, 2 + len(rows))) if layout.lines is None else layout.lines.tolist()
    assert lines == starts[1:]


def test_an_unterminated_quote_across_blocks_is_found_where_it_opens() -> None:
    text = "a,b\n" + "1,2\n" * 20 + '3,"open\n' + "4,5\n" * 20
    for block in (5, 1 << 23):
        problems = _scan(text, block).problems
        assert [(p.line, p.column) for p in problems] == [(22, "b")] and "unterminated" in problems[0].reason


# The white space the import trims (sql/queries/import_temp_tables.sql, import_trim).
EDGE_SPACE = " \t\x0b\x0c\r\xa0\ufeff"
SPACED_FIELD = st.text(st.sampled_from(["a", "1", ",", '"', "\n", "é", "\u00e0", *EDGE_SPACE]), max_size=4)


@settings(max_examples=150, deadline=None)
@given(st.integers(1, 4).flatmap(lambda k: st.lists(st.lists(SPACED_FIELD, min_size=k, max_size=k), min_size=1,
                                                     max_size=6)),
       st.sampled_from(["\n", "\r\n"]), st.sampled_from([2, 5, 1 << 23]))
def test_a_value_with_white_space_at_an_edge_marks_the_file_spaced(rows: list[list[str]], ending: str,
                                                                    block: int) -> None:
    """The import trims cells only in a file the scan marks `spaced`: it must never miss one (a false alarm only
    costs time)."""
    header = [f"c{i}" for i in range(len(rows[0]))]
    out = io.StringIO()
    csv.writer(out, lineterminator=ending).writerows([header, *rows])
    layout = _scan(out.getvalue(), block)
    read_as_written = layout.rows == len(rows)   # csv.writer leaves a lone "\r" unquoted: a blank line to any reader
    if read_as_written and any(v != v.strip(EDGE_SPACE) for row in rows for v in row):
        assert layout.spaced


def test_a_file_without_white_space_at_an_edge_is_not_spaced() -> None:
    assert not _scan("a,b\n1, x\n".replace(" ", ""), 64).spaced
    assert not _scan('a,b\r\n"x,y",2\r\n3,4', 64).spaced
    assert _scan("a,b\n1,x \n", 64).spaced and _scan('a,b\n1,"\tx"\n', 64).spaced and _scan("a,b\n1,x\xa0", 64).spaced
