"""The one-page parcel report (HTML or PDF, the same content) for an owner, a review board or an appeal: the
subject and its characteristics (the grid's subject column), its value and prior values, the explanation as a
chart, the comparable sales adjusted by the model, the flags and the caution. Written from `reval parcel`'s result
by the shared document writer (reval.report.document)."""
from __future__ import annotations

from pathlib import Path

from matplotlib.figure import Figure

from reval.report.document import Cell, Document, Num, check_path, save
from reval.service.types import ComparableGrid, Explanation, ParcelReport
from reval.service.wording import CAUTION, grid_table, indicated_range, money, percent, signed_money

CHART_WIDTH = 7.0                 # inches
BAR_HEIGHT = 0.12                 # inches per part of the explanation chart
UP, DOWN = "#2b7a3d", "#b23b3b"   # parts that add to the value, parts that take from it


def explanation_chart(x: Explanation) -> Figure:
    """One horizontal bar per part in currency, largest at the top, each labelled with its amount and share."""
    parts = x["parts"]
    fig = Figure(figsize=(CHART_WIDTH, 0.55 + BAR_HEIGHT * len(parts)))
    ax = fig.subplots()
    amounts = [p["currency"] for p in parts]
    rows = range(len(parts))[::-1]
    ax.barh(list(rows), amounts, color=[UP if a >= 0 else DOWN for a in amounts], height=0.7)
    ax.set_yticks(list(rows), [p["term"] for p in parts], fontsize=7)
    ax.axvline(0, color="#555", linewidth=0.6)
    span = max([abs(a) for a in amounts] + [1])
    for row, p in zip(rows, parts):
        ax.text(p["currency"] + (0.02 if p["currency"] >= 0 else -0.02) * span, row,
                f"{signed_money(p['currency'])} ({percent(p['percent'])})", va="center", fontsize=6.5,
                ha="left" if p["currency"] >= 0 else "right")
    ax.set_xlim(-1.45 * span if min(amounts, default=0) < 0 else -0.05 * span,
                1.45 * span if max(amounts, default=0) > 0 else 0.05 * span)
    ax.tick_params(axis="x", labelsize=7)
    ax.set_title(f"From {money(x['base'])}, {x['measured_from']}, to the model value {money(x['value'])}",
                 fontsize=6.5)
    fig.tight_layout()
    return fig


def _grid_cells(grid: ComparableGrid) -> tuple[list[str], list[list[Cell]]]:
    """The grid as every front-end lays it out, each adjustment cell carrying its exact amount (HTML data-value)."""
    header, rows = grid_table(grid)
    comps = grid["comparables"]
    amounts = {r["term"]: r["adjustments"] for r in grid["rows"]}
    exact = {"Time-adjusted price": [c["time_adjusted_price"] for c in comps],
             "Net adjustment": [c["net_adjustment"] for c in comps],
             "Adjusted price": [c["adjusted_price"] for c in comps], **amounts}
    out: list[list[Cell]] = []
    for row in rows:
        values = exact.get(row[0])
        cells: list[Cell] = list(row[:2])
        cells += row[2:] if values is None else [Num(v, t) for v, t in zip(values, row[2:])]
        out.append(cells)
    return header, out


def parcel_document(r: ParcelReport) -> Document:
    """The report's content, in reading order."""
    v = r["value"]
    doc = Document(f"Parcel {r['parcel_id']}: value {money(v['value'])}",
                   subtitle=f"{r['jurisdiction']} - valuation date {r['valuation_date']} - segment {r['segment']}, "
                            f"market area {r['market_area']}, {r['property_class']}")
    value = doc.section("Value")
    value.paragraph(CAUTION)
    priors = "; ".join(f"{k.replace('_', ' ')} {money(p)}" for k, p in r["prior_values"].items())
    value.paragraph(f"Value {money(v['value'])} ({v['source']}); model value {money(v['model_value'])}"
                    + (f" (run {r['run_id']})" if r["run_id"] else "") + (f"; {priors}" if priors else "")
                    + (f"; change of the model value {percent(r['value_change'])}." if r["value_change"] is not None
                       else "."))
    stats = r["segment_statistics"]
    value.paragraph("Flags: " + ("; ".join(r["flags"]) if r["flags"] else "none") + ".")
    if stats:
        value.paragraph(f"Segment {stats['segment']} ({stats['values'].split(' (')[0]}): {stats['n']} sales, median ratio "
                        f"{_fmt(stats['median_ratio'], '.3f')}, COD {_fmt(stats['cod'], '.1f')}, PRD "
                        f"{_fmt(stats['prd'], '.3f')}, PRB {_fmt(stats['prb'], '+.3f')}.")
    if r["explanation"]:
        doc.section("Why this value: each feature's part, largest first").figure(explanation_chart(r["explanation"]))
    grid = r["comparables"]
    part = doc.section("Comparable sales adjusted by the model")
    if grid:
        header, rows = _grid_cells(grid)
        part.paragraph(f"{indicated_range(grid)} {grid['method']}")
        part.table(header, rows)
    else:
        part.paragraph("No model run yet: comparable sales are adjusted by a run's model (`reval fit`).")
    return doc


def write_parcel_page(report: ParcelReport, out: Path) -> Path:
    """Write the parcel report to `out` (.html or .pdf, by the suffix)."""
    check_path(out)
    save(parcel_document(report), out)
    return out


def _fmt(x: float | None, spec: str) -> str:
    return "–" if x is None else format(x, spec)
