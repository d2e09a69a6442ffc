"""Ratio-study performance standards and pass / fail / too-few-sales verdicts against them.

Default limits are those of the IAAO Standard on Ratio Studies (2013), Section 9 (level, uniformity,
vertical equity) as recalled from memory (the standard's text was not at hand); the rest is marked
common practice.  Local rules may differ: every limit can be set from the `[standards]` config table.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

from reval.config_keys import Declared, comment_line, setting, toml_value

if TYPE_CHECKING:  # only for the type hint: ratio_stats loads SciPy, which config loading does not need
    from reval.stats.ratio_stats import RatioStudy

# Default COD limit by property class, with its source.
_COD_MAX_SOURCES: dict[str, tuple[float, str]] = {
    "single_family": (15.0, "IAAO: single-family, older or more heterogeneous areas, 5.0-15.0"),
    "townhouse": (15.0, "common practice: judged as single-family residential"),
    "condominium": (15.0, "IAAO: residential condominiums are judged with single-family"),
    "residential": (15.0, "IAAO: single-family residential, 5.0-15.0"),
    "newer_residential": (10.0, "IAAO: newer or more homogeneous residential areas, 5.0-10.0"),
    "income": (20.0, "IAAO: income-producing, smaller jurisdictions 5.0-20.0 (larger ones 5.0-15.0)"),
    "vacant_land": (25.0, "IAAO: vacant land, 5.0-25.0"),
}
_DEFAULT_COD_MAX = {cls: limit for cls, (limit, _) in _COD_MAX_SOURCES.items()}


def _cod_max_starter() -> list[str]:
    """The [standards.cod_max] subtable of the starter: each default limit with its source."""
    return ([comment_line("[standards.cod_max]", "highest acceptable COD by property class")]
            + [comment_line(f"{cls} = {toml_value(limit)}", source) for cls, (limit, source) in _COD_MAX_SOURCES.items()])


@dataclass(frozen=True)
class Standards(Declared):
    """Limits each ratio-study statistic is judged against (inclusive bounds)."""

    median_ratio: tuple[float, float] = setting(
        (0.90, 1.10), "IAAO: level, the median ratio within [low, high] (0.90-1.10)", lo=0, lo_open=True, active=True)
    prd: tuple[float, float] = setting(
        (0.98, 1.03), "IAAO: price-related differential within [low, high] (0.98-1.03)", lo=0, lo_open=True,
        active=True)
    prb: tuple[float, float] = setting(
        (-0.05, 0.05), "IAAO: price-related bias coefficient within [low, high] (-0.05 to 0.05)", lo=-1, hi=1,
        active=True)
    # The IAAO standard discusses sample size (small samples give unreliable statistics, so report
    # confidence intervals) but sets no fixed minimum count (from memory; its text could not be checked here).
    min_sales: int = setting(
        10, "common practice: fewer sales are reported as too few (IAAO sets no fixed minimum)", lo=1, active=True)
    cod_max_default: float = setting(
        15.0, "common practice: COD limit for a property class not in cod_max", lo=0, lo_open=True, active=True)
    cod_max: Mapping[str, float] = setting(
        _DEFAULT_COD_MAX, "highest acceptable COD by property class (IAAO); classes given are added to these",
        lo=0, lo_open=True, extends_default=True, starter=_cod_max_starter)
    # A COD of the roll's values on the sales below this is a sign of sales chasing (IAAO Standard on Ratio
    # Studies 2013: CODs below about 5.0 can point to sales chasing or an unrepresentative sample; from memory).
    cod_min: float = setting(
        5.0, "IAAO: a COD below this can point to sales chasing; `reval review` flags roll values below it",
        lo=0, active=True)

    def __hash__(self) -> int:
        return hash((self.median_ratio, tuple(sorted(self.cod_max.items())), self.cod_max_default,
                     self.prd, self.prb, self.min_sales, self.cod_min))

    def cod_limit(self, property_class: str | None) -> float:
        """Maximum COD for a property class; cod_max_default when the class is None or not listed."""
        return self.cod_max.get(property_class, self.cod_max_default) if property_class else self.cod_max_default


@dataclass(frozen=True)
class Verdict:
    """Outcome of judging one statistic: status, the limit as shown to people, and the value judged."""

    status: Literal["pass", "fail", "too_few_sales"]
    limit: str
    value: float


def _fmt(x: float, decimals: int) -> str:
    """At least `decimals` decimals, more only when needed to show the number exactly."""
    text = f"{x:.{decimals}f}"
    return text if float(text) == x else repr(x)


def _range_text(lo: float, hi: float) -> str:
    """'0.90-1.10'; ' to ' instead of '-' when the low end is negative, to avoid '-0.05--0.01'."""
    return f"{_fmt(lo, 2)}{'-' if lo >= 0 else ' to '}{_fmt(hi, 2)}"


def judge(study: RatioStudy, standards: Standards, property_class: str | None) -> dict[str, Verdict]:
    """Verdicts for median ratio, COD, PRD and PRB; bounds are inclusive and judged on unrounded values.

    A statistic that could not be computed (NaN) fails; with fewer than min_sales sales every
    statistic is 'too_few_sales' whatever its value.
    """
    few = study.n < standards.min_sales

    def verdict(value: float, ok: bool, limit: str) -> Verdict:
        return Verdict("too_few_sales" if few else "pass" if ok else "fail", limit, value)

    def in_range(value: float, bounds: tuple[float, float]) -> Verdict:
        return verdict(value, bounds[0] <= value <= bounds[1], _range_text(*bounds))

    cod_max = standards.cod_limit(property_class)
    return {
        "median_ratio": in_range(study.median_ratio, standards.median_ratio),
        "cod": verdict(study.cod, study.cod <= cod_max, f"<= {_fmt(cod_max, 0)}"),
        "prd": in_range(study.prd, standards.prd),
        "prb": in_range(study.prb, standards.prb),
    }


def passes(verdicts: Mapping[str, Verdict]) -> bool:
    """True when every verdict is a pass (too few sales is not a pass)."""
    return all(v.status == "pass" for v in verdicts.values())
