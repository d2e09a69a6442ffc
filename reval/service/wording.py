"""Words and number formats both front-ends use (the command line and the app), written once."""
from __future__ import annotations

import re
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from reval.results import ComparableGrid

from rich.cells import cell_len

from reval.states import FlagKind

CAUTION = ("Values are estimates for review by a qualified assessor; assessment level, caps, exemptions, "
           "notices and appeals follow local law.")
MISSING = "–"

# Each kind of roll flag (reval.states.FlagKind, reval/roll/flags.py) in a few words, for column heads and counts.
FLAG_WORDS: dict[FlagKind, str] = {
    "filled": "filled in", "beyond": "beyond the sales", "few_sales": "few sales", "far_from_prior": "far from prior",
    "class": "class rule", "cap": "capped", "land": "land rule", "override": "override",
}


def flag_counts(flags: dict[str, int]) -> str:
    """Parcels per kind of flag in one line ("12 filled in, 3 beyond the sales"), or "none"."""
    return ", ".join(f"{n:,} {FLAG_WORDS.get(k, k)}" for k, n in flags.items() if k in FLAG_WORDS and n) or "none"


def money(value: float | None) -> str:
    """1,234,567 (whole currency units), or – when there is no value."""
    return MISSING if value is None else f"{value:,.0f}"


def signed_money(value: float | None) -> str:
    """+1,234 or -1,234, or – when there is no value."""
    return MISSING if value is None else f"{value:+,.0f}"


def percent(value: float | None, digits: int = 1) -> str:
    """A fraction as a signed percentage (+12.5%), or – when there is no value."""
    return MISSING if value is None else f"{value:+.{digits}%}"


def measured_from(segment: str, reference: list[dict[str, str]]) -> str:
    """What a parcel's contributions are measured from: its segment's reference parcel (reval/model/reference.py)."""
    listed = "; ".join(f"{r['feature']} {r['shown']} ({r['how']})" for r in reference)
    return (f"Each part is measured from the reference parcel of segment {segment}, whose value is the base: "
            f"{listed}. A feature at its reference value adds 0.")


NAME_WIDTH = 40        # terminal cells a name may take in a table before it is cut with an ellipsis
ELLIPSIS = "…"
_SPACING = re.compile(r"[\t\n\r\v\f\x85\u2028\u2029]")
# C0 controls (ESC among them), DEL, C1 controls and the bidirectional overrides that reorder what follows
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def shown(text: object, width: int | None = None, *, lines: bool = False) -> str:
    """A user-provided string (a name, id, note, file name) as it may be printed: tabs and line breaks as
    spaces (kept as line breaks with `lines`), other control characters removed (no escape sequence reaches
    the terminal), cut to `width` terminal cells with an ellipsis. Both front-ends print data through this,
    and neither interprets markup in it."""
    if lines:
        return "\n".join(shown(line, width) for line in str(text).split("\n"))
    value = _CONTROL.sub("", _SPACING.sub(" ", str(text)))
    if width is None or cell_len(value) <= width:
        return value
    kept, used = [], 0
    for char in value:
        size = cell_len(char)
        if used + size > width - 1:
            break
        kept.append(char)
        used += size
    return "".join(kept) + ELLIPSIS


def grid_table(grid: ComparableGrid) -> tuple[list[str], list[list[str]]]:
    """The adjustment grid as the trade lays it out, for every front-end: a column per comparable (the subject
    first), a row per feature with the comparable's value and the model's adjustment, then net and gross
    adjustment and the adjusted price (the subject's column shows its model value there)."""
    comps = grid["comparables"]
    header = ["", "Subject", *(f"Sale {c['sale_id']}" for c in comps)]
    rows = [["Parcel", grid["parcel_id"], *(c["parcel_id"] for c in comps)],
            ["Sale date", "", *(c["sale_date"] for c in comps)],
            ["Sale price", "", *(money(c["sale_price"]) for c in comps)],
            ["Time-adjusted price", "", *(money(c["time_adjusted_price"]) for c in comps)]]
    for r in grid["rows"]:
        rows.append([r["term"], r["subject"],
                     *(f"{v}  {signed_money(a)}".strip() for v, a in zip(r["values"], r["adjustments"]))])
    rows += [["Net adjustment", "", *(f"{signed_money(c['net_adjustment'])} ({percent(c['net_percent'])})"
                                      for c in comps)],
             ["Gross adjustment", "", *(f"{c['gross_percent']:.1%}" + (" !" if c["over_max_gross"] else "")
                                        for c in comps)],
             ["Adjusted price", f"model {money(grid['model_value'])}", *(money(c["adjusted_price"]) for c in comps)]]
    return header, rows


def indicated_range(grid: ComparableGrid) -> str:
    """One sentence: the value the comparables indicate and their range beside the model value."""
    if not grid["comparables"]:
        return f"No comparable sale found (searched: {grid['searched'].replace('_', ' ')})."
    inside = "inside" if grid["brackets"] else "outside"
    over = sum(c["over_max_gross"] for c in grid["comparables"])
    beyond = (f" {over} sale(s) marked ! need more than the maximum gross adjustment of "
              f"{grid['max_gross_adjustment']:.0%}: too few sales were within it." if over else "")
    return (f"Indicated value {money(grid['indicated_value'])} (weighted median of {len(grid['comparables'])} "
            f"adjusted sales, range {money(grid['low'])} to {money(grid['high'])}); the model value "
            f"{money(grid['model_value'])} is {inside} the range. Searched the {grid['searched'].replace('_', ' ')}: "
            f"{grid['candidates']} candidate sales.{beyond}")
