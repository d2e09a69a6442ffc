"""Words and number formats both front-ends use (the command line and the app), written once."""
from __future__ import annotations

import re

from rich.cells import cell_len

CAUTION = ("Values are estimates for review by a qualified assessor; assessment level, caps, exemptions, "
           "notices and appeals follow local law.")
MISSING = "–"


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
