"""The structure of an input CSV file, checked before DuckDB reads it: encoding, quotes, NUL bytes, the
header and the number of values on every row, each problem with its physical line and column.

The file must be UTF-8 (a UTF-8 byte-order mark is allowed), comma-separated, with double quotes around
values that hold commas, quotes or line breaks and a doubled quote for a quote inside them (RFC 4180).
DuckDB's reader is lenient where this matters (it keeps a stray quote or a NUL byte in a value and renames
a repeated column name), so the rules are checked here, vectorised over the bytes in blocks: a quote opens
a value only at its start and closes it only at its end, every row has as many values as the header,
column names are unique. Line numbers are physical lines of the file: a row after a quoted line break, or
after a blank line (DuckDB skips blank lines), starts further down than its row number says, and
`CsvLayout.lines` maps each data row to its line. The scan also says whether any value may have white space at
an edge (`CsvLayout.spaced`): only then does the import pay for trimming every cell.
"""
from __future__ import annotations

import codecs
import csv
import mmap
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from reval.errors import DataProblem

BLOCK = 1 << 23
QUOTE, COMMA, NEWLINE, RETURN = 0x22, 0x2C, 0x0A, 0x0D
UTF8_BOM = b"\xef\xbb\xbf"
SHOWN_PER_KIND = 100        # problems of one kind listed per file (the count of the rest is reported)
# Bytes that may be (part of) white space the import trims (reval/sql/queries/import_temp_tables.sql import_trim):
# space, tab, line tabulation, form feed, carriage return, and the first and last bytes of a no-break space (C2 A0)
# and of a byte-order mark (EF BB BF). A byte like these beside a separator marks the file as `spaced`; other
# characters that share those bytes make it so too, which costs only time.
EDGE_SPACE = np.zeros(256, dtype=bool)
EDGE_SPACE[[0x20, 0x09, 0x0B, 0x0C, 0x0D, 0xC2, 0xA0, 0xEF, 0xBF]] = True
SEPARATORS = np.array([QUOTE, COMMA, NEWLINE], dtype=np.uint8)


@dataclass
class CsvLayout:
    """What the scan found: the header, the number of data rows, the physical line of each data row when
    it is not simply row number + 1 (else None), whether any value may start or end with white space, and the
    problems."""

    header: list[str] = field(default_factory=list)
    rows: int = 0
    lines: np.ndarray | None = None
    spaced: bool = True
    problems: list[DataProblem] = field(default_factory=list)


def scan_csv(path: Path) -> CsvLayout:
    """Check the file's structure; see the module docstring for the rules."""
    with path.open("rb") as handle:
        if path.stat().st_size == 0:
            return CsvLayout(problems=[DataProblem(str(path), 1, "(file)", None, "the file is empty (no header line)")])
        with mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as view:
            buf = np.frombuffer(view, dtype=np.uint8)
            try:
                return _Scan(path, buf).run()
            finally:
                del buf


class _Scan:
    def __init__(self, path: Path, buf: np.ndarray) -> None:
        self.path, self.buf = path, buf
        self.start = 3 if bytes(buf[:3]) == UTF8_BOM else 0
        self.layout = CsvLayout()
        self.newlines = np.empty(0, np.int64)
        self.nuls: tuple[np.ndarray, int] = (self.newlines, 0)
        self.spaced = False

    def problem(self, line: int, column: str, value: str | None, reason: str) -> None:
        self.layout.problems.append(DataProblem(str(self.path), line, column, value, reason))

    def run(self) -> CsvLayout:
        if not self._utf8():
            return self.layout
        ends, values, quotes, odd = self._blocks()
        self.layout.spaced = self.spaced or bool(EDGE_SPACE[self.buf[[self.start, -1]]].any())
        starts = np.concatenate([[self.start], ends + 1])
        stops = np.concatenate([ends, [len(self.buf)]])
        if stops[-1] <= starts[-1]:                     # the file ends with a line break
            starts, stops, values = starts[:-1], stops[:-1], values[:-1]
        blank = (stops - starts == 0) | ((stops - starts == 1) & (self.buf[np.minimum(starts, len(self.buf) - 1)] == RETURN))
        if blank[0]:
            self.problem(1, "(line)", None, "the first line is empty: the column names must be on line 1")
            return self.layout
        self._header(starts, stops)
        lines = 1 + np.searchsorted(self.newlines, starts)
        data = ~blank
        data[0] = False
        data_lines = lines[data]
        self.layout.rows = int(data.sum())
        if not np.array_equal(data_lines, np.arange(2, 2 + self.layout.rows)):
            self.layout.lines = data_lines
        self._nul_bytes(starts)
        if not self._quotes(quotes, starts, odd):     # after a misplaced quote the rows are not what they seem
            self._ragged(values[data], data_lines)
        return self.layout

    def _utf8(self) -> bool:
        """UTF-8 text, else one problem saying what the bytes look like."""
        head = bytes(self.buf[:4])
        if head.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)) or (len(head) >= 2 and 0 in head[:2]):
            self.problem(1, "(file)", None, "the file is UTF-16 text, not UTF-8: save it as UTF-8 (e.g. \"CSV UTF-8\")")
            return False
        decoder = codecs.getincrementaldecoder("utf-8")()
        for at in range(0, len(self.buf), BLOCK):
            block = self.buf[at:at + BLOCK]
            if block.max() < 0x80 and not decoder.getstate()[0]:
                continue                                     # ASCII, and no character left open before it
            try:
                decoder.decode(bytes(block), final=at + BLOCK >= len(self.buf))
            except UnicodeDecodeError as exc:
                pos = at + exc.start
                newlines = np.flatnonzero(self.buf[:pos] == NEWLINE)
                row_start = int(newlines[-1]) + 1 if len(newlines) else self.start
                header = bytes(self.buf[self.start:newlines[0] if len(newlines) else pos]).decode("utf-8", "replace")
                names = next(csv.reader([header.rstrip("\r")]), [])
                index = _value_index(bytes(self.buf[row_start:pos]))
                column = names[index] if len(newlines) and index < len(names) else f"(value {index + 1})"
                self.problem(len(newlines) + 1, column, None, f"byte 0x{int(self.buf[pos]):02X} is not UTF-8 (the file may be in "
                             "Latin-1 or Windows-1252): save it as UTF-8")
                return False
        return True

    def _blocks(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, bool]:
        """Row ends (line breaks outside quotes), values per row, quote positions, and whether a quote is
        left open at the end; block by block, carrying the quote state across blocks. A byte is inside
        quotes when an odd number of quotes precede it (a doubled quote counts twice)."""
        ends: list[np.ndarray] = []
        values: list[np.ndarray] = []
        quotes: list[np.ndarray] = []
        newlines: list[np.ndarray] = []
        nuls: list[np.ndarray] = []
        odd, commas_before, nul_count, nul_kept = 0, 0, 0, 0
        empty = np.empty(0, np.int64)
        for at in range(self.start, len(self.buf), BLOCK):
            block = self.buf[at:at + BLOCK]
            quote, newline, comma = (np.flatnonzero(block == byte) for byte in (QUOTE, NEWLINE, COMMA))
            if len(quote):
                end = newline[(np.searchsorted(quote, newline) + odd) % 2 == 0]
                comma = comma[(np.searchsorted(quote, comma) + odd) % 2 == 0]
            else:
                end, comma = (newline, comma) if odd == 0 else (empty, empty)
            ends.append(end + at)
            values.append(np.searchsorted(comma, end) + commas_before)      # commas outside quotes before each end
            quotes.append(quote + at)
            newlines.append(newline + at)
            odd, commas_before = (odd + len(quote)) % 2, commas_before + len(comma)
            if not self.spaced:
                self.spaced = self._spaced_beside(at, at + len(block))
            nul = np.flatnonzero(block == 0)
            nul_count += len(nul)
            if len(nul) and nul_kept < SHOWN_PER_KIND:
                nuls.append(nul + at)
                nul_kept += len(nul)
        self.newlines = np.concatenate(newlines) if newlines else empty
        self.nuls = (np.concatenate(nuls) if nuls else empty, nul_count)
        at_end = np.concatenate([*values, [commas_before]])
        per_row = np.diff(np.concatenate([[0], at_end])) + 1
        return (np.concatenate(ends) if ends else empty), per_row, (np.concatenate(quotes) if quotes else empty), bool(odd)

    def _spaced_beside(self, at: int, stop: int) -> bool:
        """Whether a byte of EDGE_SPACE in buf[at:stop] is next to a separator (quote, line break or comma: a cell's
        edge is next to one unless it is the file's first or last byte, checked in run); the carriage return of a
        CRLF is no value's. Only the (usually few) white-space bytes are looked at."""
        buf, n, block = self.buf, len(self.buf), self.buf[at:stop]
        low = block <= 0x20                           # two comparisons cost less than a table look-up per byte
        spaces = np.flatnonzero(low if block.max() < 0xA0 else low | (block >= 0xA0)) + at
        spaces = spaces[EDGE_SPACE[buf[spaces]]]
        if not len(spaces):
            return False
        after = buf[np.minimum(spaces + 1, n - 1)]
        spaces = spaces[(buf[spaces] != RETURN) | (after != NEWLINE)]          # the CR of a CRLF is no value's
        before, after = buf[np.maximum(spaces - 1, 0)], buf[np.minimum(spaces + 1, n - 1)]
        after_crlf = (after == RETURN) & (buf[np.minimum(spaces + 2, n - 1)] == NEWLINE)
        return bool(np.isin(before, SEPARATORS).any() or np.isin(after, SEPARATORS).any() or after_crlf.any())

    def _header(self, starts: np.ndarray, stops: np.ndarray) -> None:
        text = bytes(self.buf[starts[0]:stops[0]]).decode("utf-8").rstrip("\r")
        names = next(csv.reader([text]), [])
        self.layout.header = names
        if len(names) == 1 and (other := next((d for d in ";\t|" if d in names[0]), None)):
            self.problem(1, names[0], None, f"the header is one column: the file seems separated by {other!r}, but "
                         "reval reads comma-separated files (save it with commas)")
        seen: dict[str, int] = {}
        for i, name in enumerate(names, 1):
            if name in seen:
                self.problem(1, name, name, f"column name repeated (columns {seen[name]} and {i}): name each column once")
            seen.setdefault(name, i)

    def _where(self, starts: np.ndarray, pos: int) -> tuple[int, str]:
        """Physical line and column name of a byte position."""
        line = 1 + int(np.searchsorted(self.newlines, pos))
        row_start = int(starts[np.searchsorted(starts, pos, side="right") - 1])
        index = _value_index(bytes(self.buf[row_start:pos]))
        names = self.layout.header
        return line, names[index] if index < len(names) else f"(value {index + 1})"

    def _nul_bytes(self, starts: np.ndarray) -> None:
        found, count = self.nuls
        for pos in found[:SHOWN_PER_KIND]:
            line, column = self._where(starts, int(pos))
            self.problem(line, column, None, "NUL byte (a zero byte) in the text: the file is damaged or not text")
        self._more(count, "NUL bytes")

    def _quotes(self, quotes: np.ndarray, starts: np.ndarray, odd: bool) -> bool:
        """A quote opens a value only at its start and closes it only at its end (or is doubled inside);
        whether any quote is wrong."""
        if not len(quotes):
            return False
        n = len(self.buf)
        opening = np.arange(1, len(quotes) + 1) % 2 == 1
        before = np.where(quotes > self.start, self.buf[np.maximum(quotes - 1, 0)], COMMA)
        after = np.where(quotes + 1 < n, self.buf[np.minimum(quotes + 1, n - 1)], COMMA)
        bad_open = opening & ~np.isin(before, (COMMA, NEWLINE, QUOTE))
        bad_close = ~opening & ~np.isin(after, (COMMA, NEWLINE, RETURN, QUOTE))
        bad = np.flatnonzero(bad_open | bad_close)
        for i in bad[:SHOWN_PER_KIND]:
            line, column = self._where(starts, int(quotes[i]))
            self.problem(line, column, None, "a quote inside a value that is not quoted as a whole (quote the value "
                         "and double the quote inside it)" if bad_open[i] else
                         "text after the closing quote of a quoted value")
        self._more(len(bad), "misplaced quotes")
        if odd and not len(bad):
            line, column = self._where(starts, int(quotes[-1]))
            self.problem(line, column, None, "unterminated quote: the quoted value that starts here never ends")
        return odd or bool(len(bad))

    def _ragged(self, values: np.ndarray, lines: np.ndarray) -> None:
        expected = len(self.layout.header)
        wrong = np.flatnonzero(values != expected)
        for i in wrong[:SHOWN_PER_KIND]:
            found = int(values[i])
            column = (self.layout.header[found] if found < expected else f"(value {expected + 1})")
            self.problem(int(lines[i]), column, None, f"{found} values on this row, the header has {expected}")
        self._more(len(wrong), "rows with the wrong number of values")

    def _more(self, count: int, what: str) -> None:
        if count > SHOWN_PER_KIND:
            self.problem(self.layout.problems[-1].line, "(file)", None,
                         f"and {count - SHOWN_PER_KIND:,} more {what} after this line")


def _value_index(prefix: bytes) -> int:
    """Which value of its row a position falls in: commas outside quotes before it."""
    inside, commas = False, 0
    for byte in prefix:
        if byte == QUOTE:
            inside = not inside
        elif byte == COMMA and not inside:
            commas += 1
    return commas
