"""A small document writer: titled sections of paragraphs, tables and matplotlib figures, written as one
self-contained HTML file or a PDF with the same content.

Use:
    doc = Document("Ratio study", subtitle="Vellmarsh, valuation date 2026-01-01")
    part = doc.section("Summary")
    part.paragraph("Level, uniformity and vertical equity of ...")
    part.table(["group", "n", "median"], [["all", 812, Num(0.9871, "0.987")]], caption="All sales")
    part.figure(fig, caption="Ratio against the value proxy")   # a matplotlib Figure; closed when written
    doc.write(Path("study.html"))   # or study.pdf: chosen by the suffix

HTML: one file, figures embedded as base64 PNG, no scripts, no network; a numeric table cell carries its exact
value in `data-value` (so a reader or a test gets the number, not only its rounded text). PDF: A4 pages laid
out with matplotlib's PdfPages; text is real PDF text (a machine can read it back), each figure one image.
Each figure is rendered to PNG once and the same image goes to either format.
"""
from __future__ import annotations

import base64
import html
import io
import math
import struct
import textwrap
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import matplotlib

from reval.errors import UserError

matplotlib.use("Agg")   # files only; never a window

from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402
from matplotlib.figure import Figure as MplFigure  # noqa: E402
import matplotlib.image as mpimg  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.text import Text  # noqa: E402

FIGURE_DPI = 130
SUFFIXES = (".html", ".htm", ".pdf")
# Ligatures ("fi") become glyphs outside the font's text encoding that text extraction misreads; matplotlib
# shapes them from 3.11 on and then accepts font features, so the PDF's text is turned off them there.
PLAIN_TEXT: dict[str, Any] = {"fontfeatures": ["-liga"]} if hasattr(Text, "set_fontfeatures") else {}


@dataclass(frozen=True)
class Num:
    """A number shown as `text` (the caller's format) and kept exact as `value`."""

    value: float | int | None
    text: str


Cell = str | int | float | Num | None


def cell_text(cell: Cell) -> str:
    """How a cell reads: Num's own text, integers as they are, other floats to 4 significant digits, None as a dash."""
    if cell is None:
        return "-"
    if isinstance(cell, Num):
        return cell.text
    if isinstance(cell, bool) or isinstance(cell, int):
        return str(cell)
    if isinstance(cell, float):
        return "-" if math.isnan(cell) else f"{cell:.4g}"
    return cell


def cell_value(cell: Cell) -> float | int | None:
    """The exact number behind a cell, or None for text."""
    if isinstance(cell, Num):
        return cell.value
    if isinstance(cell, (int, float)) and not isinstance(cell, bool):
        return cell
    return None


@dataclass
class Paragraph:
    text: str


@dataclass
class Table:
    columns: list[str]
    rows: list[list[Cell]]
    caption: str = ""


@dataclass
class Figure:
    png: bytes              # rendered once, at FIGURE_DPI
    width_in: float
    height_in: float
    caption: str = ""


Block = Paragraph | Table | Figure


@dataclass
class Section:
    """A titled part of a document; add blocks in reading order."""

    title: str
    blocks: list[Block] = field(default_factory=list)

    def paragraph(self, text: str) -> None:
        self.blocks.append(Paragraph(text))

    def table(self, columns: Sequence[str], rows: Sequence[Sequence[Cell]], caption: str = "") -> None:
        self.blocks.append(Table(list(columns), [list(r) for r in rows], caption))

    def figure(self, fig: MplFigure, caption: str = "") -> None:
        """Render a matplotlib figure now (PNG) and close it, so a long report holds no open figures."""
        buffer = io.BytesIO()
        fig.savefig(buffer, format="png", dpi=FIGURE_DPI, bbox_inches="tight")
        plt.close(fig)
        png = buffer.getvalue()
        w_px, h_px = struct.unpack(">II", png[16:24])   # the PNG header's width and height (after tight cropping)
        self.blocks.append(Figure(png, w_px / FIGURE_DPI, h_px / FIGURE_DPI, caption))


@dataclass
class Document:
    """A title, an optional subtitle and sections in reading order."""

    title: str
    subtitle: str = ""
    sections: list[Section] = field(default_factory=list)

    def section(self, title: str) -> Section:
        part = Section(title)
        self.sections.append(part)
        return part

    def figure_count(self) -> int:
        return sum(isinstance(b, Figure) for s in self.sections for b in s.blocks)

    def write(self, path: Path) -> Path:
        """Write HTML (.html, .htm) or PDF (.pdf), chosen by the suffix; returns the path."""
        suffix = path.suffix.lower()
        if suffix in (".html", ".htm"):
            path.write_text(to_html(self), encoding="utf-8")
        elif suffix == ".pdf":
            write_pdf(self, path)
        else:
            raise ValueError(f"{path.name}: a report is written as .html or .pdf")
        return path


# ---- HTML -------------------------------------------------------------------------------------------------

_CSS = """body{font-family:system-ui,sans-serif;max-width:60rem;margin:2rem auto;padding:0 1rem;color:#222;line-height:1.4}
h1{margin-bottom:.2rem}h2{border-bottom:1px solid #999;margin-top:2rem}.subtitle{color:#555;margin-top:0}
table{border-collapse:collapse;margin:.6rem 0;font-size:.85rem}th,td{border:1px solid #ccc;padding:.15rem .45rem}
th{background:#eee;text-align:left}td.num{text-align:right;font-variant-numeric:tabular-nums}
caption{caption-side:top;text-align:left;font-weight:600;padding:.2rem 0}
figure{margin:1rem 0}figure img{max-width:100%}figcaption{font-size:.85rem;color:#444}
@media print{h2{page-break-before:auto}figure,table{page-break-inside:avoid}}"""


def _html_table(t: Table) -> str:
    head = "".join(f"<th>{html.escape(c)}</th>" for c in t.columns)
    body = []
    for row in t.rows:
        cells = []
        for c in row:
            value = cell_value(c)
            if value is None:
                cells.append(f"<td>{html.escape(cell_text(c))}</td>")
            else:
                cells.append(f'<td class="num" data-value="{value!r}">{html.escape(cell_text(c))}</td>')
        body.append("<tr>" + "".join(cells) + "</tr>")
    caption = f"<caption>{html.escape(t.caption)}</caption>" if t.caption else ""
    return f"<table>{caption}<thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _html_block(b: Block) -> str:
    if isinstance(b, Paragraph):
        return f"<p>{html.escape(b.text)}</p>"
    if isinstance(b, Table):
        return _html_table(b)
    data = base64.b64encode(b.png).decode("ascii")
    return (f'<figure><img alt="{html.escape(b.caption)}" width="{round(b.width_in * 96)}" '
            f'src="data:image/png;base64,{data}"><figcaption>{html.escape(b.caption)}</figcaption></figure>')


def to_html(doc: Document) -> str:
    """The whole document as one HTML page: inline CSS and images, nothing fetched."""
    parts = [f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>{html.escape(doc.title)}</title>",
             f"<style>{_CSS}</style></head><body><h1>{html.escape(doc.title)}</h1>"]
    if doc.subtitle:
        parts.append(f'<p class="subtitle">{html.escape(doc.subtitle)}</p>')
    for s in doc.sections:
        parts.append(f"<section><h2>{html.escape(s.title)}</h2>")
        parts.extend(_html_block(b) for b in s.blocks)
        parts.append("</section>")
    parts.append("</body></html>\n")
    return "\n".join(parts)


# ---- PDF --------------------------------------------------------------------------------------------------

PAGE_W, PAGE_H = 8.27, 11.69          # A4, inches
MARGIN = 0.7
TEXT_W = PAGE_W - 2 * MARGIN
BODY_PT, TABLE_PT = 9.5, 7.5
CHAR_W = 0.55 / 72                    # average DejaVu Sans advance per point of size, inches (for wrapping)


class _Pages:
    """A cursor over A4 pages: place text and images top to bottom, start a new page when one is full; `save`
    receives each finished page."""

    def __init__(self, save: Callable[[MplFigure], None], footer: str) -> None:
        self.save, self.footer, self.page_no = save, footer, 0
        self.fig: MplFigure | None = None
        self.y = 0.0

    def _new(self) -> None:
        self.close()
        self.page_no += 1
        self.fig = plt.figure(figsize=(PAGE_W, PAGE_H))
        self.fig.text(MARGIN / PAGE_W, 0.4 / PAGE_H, self.footer, fontsize=7, color="#555", **PLAIN_TEXT)
        self.fig.text(1 - MARGIN / PAGE_W, 0.4 / PAGE_H, f"page {self.page_no}", fontsize=7, color="#555", ha="right")
        self.y = PAGE_H - MARGIN

    def close(self) -> None:
        if self.fig is not None:
            self.save(self.fig)
            plt.close(self.fig)
            self.fig = None

    def need(self, height: float) -> MplFigure:
        """The current page if `height` inches fit below the cursor, else a new one."""
        if self.fig is None or self.y - height < MARGIN + 0.3:
            self._new()
        assert self.fig is not None
        return self.fig

    def text(self, x: float, s: str, size: float, weight: str = "normal", color: str = "#222",
             ha: str = "left") -> None:
        """One line at the cursor, x in inches from the left page edge."""
        line_h = size * 1.45 / 72
        fig = self.need(line_h)
        self.y -= line_h
        fig.text(x / PAGE_W, self.y / PAGE_H, s, fontsize=size, weight=weight, color=color, ha=ha, va="bottom", **PLAIN_TEXT)

    def wrapped(self, s: str, size: float, weight: str = "normal", color: str = "#222") -> None:
        width = max(20, int(TEXT_W / (size * CHAR_W)))
        for line in textwrap.wrap(s, width) or [""]:
            self.text(MARGIN, line, size, weight, color)

    def gap(self, inches: float) -> None:
        self.y -= inches

    def image(self, b: Figure) -> None:
        scale = min(1.0, TEXT_W / b.width_in, (PAGE_H - 2 * MARGIN - 1.0) / b.height_in)
        w, h = b.width_in * scale, b.height_in * scale
        fig = self.need(h + 0.1)
        self.y -= h
        ax = fig.add_axes((MARGIN / PAGE_W, self.y / PAGE_H, w / PAGE_W, h / PAGE_H))
        ax.imshow(mpimg.imread(io.BytesIO(b.png), format="png"), interpolation="antialiased")
        ax.set_axis_off()


MONO_W = 0.602                        # DejaVu Sans Mono's advance, in ems
MIN_TABLE_PT = 5.5
GAP = "  "                            # between table columns


def _table_lines(t: Table) -> tuple[list[str], list[list[str]], float]:
    """A table as monospaced lines (one text per line, so a long table draws fast): the header line(s), each
    row's line(s), and the font size. Numeric columns are right-aligned; when the table is too wide even at the
    smallest size, its widest text column is wrapped (nothing is cut)."""
    cells = [[cell_text(c) for c in r] + [""] * (len(t.columns) - len(r)) for r in t.rows]
    numeric = [any(cell_value(r[i]) is not None for r in t.rows if i < len(r)) for i in range(len(t.columns))]
    widths = [max([len(c)] + [len(r[i]) for r in cells]) for i, c in enumerate(t.columns)]
    most = int(TEXT_W * 72 / (MONO_W * MIN_TABLE_PT))

    def total() -> int:
        return sum(widths) + len(GAP) * (len(widths) - 1)

    while total() > most:
        text_cols = [i for i in range(len(widths)) if not numeric[i]] or list(range(len(widths)))
        widest = max(text_cols, key=lambda i: widths[i])
        cut = max(12, widths[widest] - (total() - most))
        if cut >= widths[widest]:
            break
        widths[widest] = cut

    def lines(row: list[str]) -> list[str]:
        parts = [textwrap.wrap(c, w) or [""] if len(c) > w else [c] for c, w in zip(row, widths)]
        height = max(len(p) for p in parts)
        return [GAP.join((p[k] if k < len(p) else "").rjust(w) if num else (p[k] if k < len(p) else "").ljust(w)
                         for p, w, num in zip(parts, widths, numeric)).rstrip() for k in range(height)]

    size = max(MIN_TABLE_PT, min(TABLE_PT, TEXT_W * 72 / (MONO_W * max(1, total()))))
    return lines(list(t.columns)), [lines(r) for r in cells], size


def _pdf_table(pages: _Pages, t: Table) -> None:
    header, rows, size = _table_lines(t)
    line_h = size * 1.4 / 72

    def line(text: str, weight: str) -> None:
        fig = pages.need(line_h)
        pages.y -= line_h
        fig.text(MARGIN / PAGE_W, pages.y / PAGE_H, text, fontsize=size, weight=weight, family="DejaVu Sans Mono",
                 **PLAIN_TEXT)

    if t.caption:
        pages.wrapped(t.caption, BODY_PT, "bold")
    for h in header:
        line(h, "bold")
    page = pages.page_no
    for r in rows:
        pages.need(line_h * len(r))   # a new page when full; then repeat the header
        if pages.page_no != page:
            for h in header:
                line(h, "bold")
            page = pages.page_no
        for text in r:
            line(text, "normal")
    pages.gap(0.12)


def _lay_out(doc: Document, save: Callable[[MplFigure], None]) -> None:
    """Lay the document out on A4 pages, handing each finished page to `save`."""
    pages = _Pages(save, doc.title)
    pages.wrapped(doc.title, 18, "bold")
    if doc.subtitle:
        pages.wrapped(doc.subtitle, 11, color="#444")
    pages.gap(0.15)
    for s in doc.sections:
        pages.need(1.5)   # a section title never sits alone at the foot of a page
        pages.gap(0.12)
        pages.wrapped(s.title, 13, "bold")
        pages.gap(0.05)
        for b in s.blocks:
            if isinstance(b, Paragraph):
                pages.wrapped(b.text, BODY_PT)
                pages.gap(0.06)
            elif isinstance(b, Table):
                _pdf_table(pages, b)
            else:
                pages.image(b)
                if b.caption:
                    pages.wrapped(b.caption, 8, color="#444")
                pages.gap(0.12)
    pages.close()


def write_pdf(doc: Document, path: Path) -> None:
    """The document on A4 pages; every string is PDF text (Type 42 fonts, so text extracts cleanly)."""
    with matplotlib.rc_context({"pdf.fonttype": 42, "font.family": "DejaVu Sans"}), PdfPages(path) as pdf:
        pdf.infodict()["Title"] = doc.title
        _lay_out(doc, pdf.savefig)


def write_page_png(doc: Document, path: Path, page: int = 1, dpi: int = 60) -> None:
    """One page of the PDF layout as a PNG (a preview, e.g. the README's picture of a page)."""
    def save(fig: MplFigure) -> None:
        if page_no[0] == page:
            fig.savefig(path, dpi=dpi)
        page_no[0] += 1

    page_no = [1]
    with matplotlib.rc_context({"pdf.fonttype": 42, "font.family": "DejaVu Sans"}):
        _lay_out(doc, save)


def check_path(out: Path) -> None:
    """Refuse, before any work, a report file that is neither HTML nor PDF."""
    if out.suffix.lower() not in SUFFIXES:
        raise UserError(f"{out}: the report is written as .html or .pdf; name the file with one of those endings.")


def save(doc: Document, out: Path) -> None:
    """Write `doc` to a partial file beside `out`, then put it in place: a failed write leaves no half report."""
    partial = out.parent / f"{out.stem}.partial{out.suffix}"   # the suffix picks the format
    try:
        doc.write(partial)
        partial.replace(out)
    except OSError as exc:
        partial.unlink(missing_ok=True)
        raise UserError(f"Cannot write {out}: {exc.strerror or exc}") from None
