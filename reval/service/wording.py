"""Words and number formats both front-ends use (the command line and the app), written once."""
from __future__ import annotations

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
