"""How numbers and verdicts read on screen: never colour alone, always a symbol or word too."""
from __future__ import annotations

from typing import Any

from rich.text import Text

from reval.service.types import OverviewRow, StatCell
from reval.service.wording import CAUTION, NAME_WIDTH, measured_from, money, percent, shown, signed_money

__all__ = ["CAUTION", "NAME_WIDTH", "measured_from", "money", "percent", "shown", "signed_money"]

MARKS = {"pass": "✓", "fail": "✗ FAIL", "inconclusive": "? unsure", "too_few_sales": "~ few", "no_sales": "– none"}
SHORT_MARKS = {"pass": "✓", "fail": "✗", "inconclusive": "?", "too_few_sales": "~", "no_sales": "–"}
STAT_FORMATS = {"median_ratio": ".3f", "cod": ".1f", "prd": ".3f", "prb": "+.3f"}
STAT_NAMES = {"median_ratio": "Median ratio", "cod": "COD", "prd": "PRD", "prb": "PRB"}
LEGEND = "✓ meets the standard · ✗ FAIL: does not · ? inconclusive · ~ too few sales to judge"
SHORT_LEGEND = "✓ meets · ✗ fails · ? unsure · ~ few sales · – none"
SHORT_CAUTION = "Estimates for review by a qualified assessor; local law applies (? for more)."


def feature_label(name: str, unit: str = "") -> str:
    """A feature as axes and tables name it, with its unit: "living area (sq ft)"."""
    words = name.replace("_", " ")
    return f"{words} ({unit})" if unit else words


def stat_cell(cell: StatCell, stat: str, short: bool = False) -> str:
    """'0.982 ✓', '1.046 ✗ FAIL' (short: '1.046✗') or '–' when there is no value."""
    value = cell.get("value")
    if value is None:
        return "–"
    mark = (SHORT_MARKS if short else MARKS).get(cell.get("status") or "", "")
    return f"{format(value, STAT_FORMATS[stat])}{'' if short else ' '}{mark}".rstrip()


def ci_text(cell: StatCell, stat: str) -> str:
    ci = cell.get("ci") or [None, None]
    if ci[0] is None or ci[1] is None:
        return "–"
    return f"{format(ci[0], STAT_FORMATS[stat])} … {format(ci[1], STAT_FORMATS[stat])}"


def model_cell(row: OverviewRow) -> str:
    """How the segment's model was made: own or pooled, with the share borrowed from its parent (market area)
    said as borrowed, or the parent's model alone."""
    kind = row.get("kind")
    if kind is None:
        return "–"
    if kind == "parent_only":
        return "parent's model"
    share = row.get("borrowed_share")
    return kind if share is None else f"{kind}, {share:.0%} borrowed"


def short_money(value: float) -> str:
    """12k, 1.2M: for axis labels."""
    size = abs(value)
    if size >= 1e6:
        return f"{value / 1e6:.1f}M"
    if size >= 1e3:
        return f"{value / 1e3:.0f}k"
    return f"{value:.0f}"


def number(value: float | None, fmt: str = ".3g") -> str:
    return "–" if value is None else format(value, fmt)


def gate_detail(stats: dict[str, StatCell], model_values: bool) -> str:
    """What the approval gate will say, as far as the screen knows it (the core decides)."""
    if not model_values:
        return ("No out-of-fold statistics are shown for this segment yet; the core checks those of the "
                "batch's run and refuses approval without a note when they fail.")
    marks = " · ".join(f"{STAT_NAMES[k]} {stat_cell(stats[k], k)}" for k in STAT_FORMATS)
    failing = any(stats[k].get("status") != "pass" for k in STAT_FORMATS)
    verdict = ("Not all pass: the core refuses approval without a note; with a note it approves over them "
               "and stores the note." if failing else "All pass: a note is optional.")
    return f"Out-of-fold statistics: {marks}. {verdict}"


def cells(*values: Any) -> list[Any]:
    """A DataTable row as the app shows it: each text a plain Text (DataTable reads a str as markup) with
    control characters removed and cut to NAME_WIDTH cells (reval.service.wording.shown); styled Text kept."""
    return [Text(shown(v, NAME_WIDTH), end="") if isinstance(v, str) else v for v in values]
