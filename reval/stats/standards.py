"""Ratio-study performance standards and verdicts against them: pass, fail, inconclusive (the interval rule),
too few sales, no sales.

Default limits are those of the IAAO Standard on Ratio Studies (2013), Section 9 (level, uniformity,
vertical equity) as recalled from memory (the standard's text was not at hand); the rest is marked
common practice.  Local rules may differ: every limit can be set from the `[standards]` config table.

Two verdict rules (`verdict_rule`): "point" judges the point estimate (the usual reading of the standard);
"interval" judges the confidence interval: pass when it lies within the limits, fail when it lies wholly
outside, inconclusive when it straddles a limit. The IAAO standard advises confidence intervals for small
samples, so that a sample too small to tell is not read as a failure (from memory).
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from reval.config_keys import Declared, comment_line, setting, toml_value
from reval.states import VerdictRule, VerdictStatus

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
    verdict_rule: VerdictRule = setting(
        "point", "common practice: judge the point estimate; \"interval\" judges its confidence interval (IAAO advises "
        "intervals for small samples): inconclusive when it straddles a limit", active=True)

    def __hash__(self) -> int:
        return hash((self.median_ratio, tuple(sorted(self.cod_max.items())), self.cod_max_default,
                     self.prd, self.prb, self.min_sales, self.cod_min, self.verdict_rule))

    def cod_limit(self, property_class: str | None) -> float:
        """Maximum COD for a property class; cod_max_default when the class is None or not listed."""
        return self.cod_max.get(property_class, self.cod_max_default) if property_class else self.cod_max_default


@dataclass(frozen=True)
class Verdict:
    """Outcome of judging one statistic: status, the limit as shown to people, and the value judged."""

    status: VerdictStatus
    limit: str
    value: float


def _fmt(x: float, decimals: int) -> str:
    """At least `decimals` decimals, more only when needed to show the number exactly."""
    text = f"{x:.{decimals}f}"
    return text if float(text) == x else repr(x)


def _range_text(lo: float, hi: float) -> str:
    """'0.90-1.10'; ' to ' instead of '-' when the low end is negative, to avoid '-0.05--0.01'."""
    return f"{_fmt(lo, 2)}{'-' if lo >= 0 else ' to '}{_fmt(hi, 2)}"


def _status(inside: bool, lo_inside: bool, hi_inside: bool, outside: bool, rule: VerdictRule) -> VerdictStatus:
    """Pass or fail by the point estimate (`inside`), or by the interval: inside wholly, outside wholly, or
    straddling a limit (an interval that cannot be computed judges nothing: inconclusive)."""
    if rule == "point":
        return "pass" if inside else "fail"
    if lo_inside and hi_inside:
        return "pass"
    return "fail" if outside else "inconclusive"


def judge(study: RatioStudy, standards: Standards, property_class: str | None) -> dict[str, Verdict]:
    """Verdicts for median ratio, COD, PRD and PRB; bounds are inclusive and judged on unrounded values.

    Under the point rule a statistic that could not be computed (NaN) fails; under the interval rule an
    interval that could not be computed is inconclusive. With no sales every statistic is 'no_sales', with
    fewer than min_sales 'too_few_sales', whatever its value.
    """
    rule = standards.verdict_rule

    def in_range(value: float, ci: tuple[float, float], bounds: tuple[float, float]) -> VerdictStatus:
        def ok(x: float) -> bool:
            return bounds[0] <= x <= bounds[1]
        outside = ci[1] < bounds[0] or ci[0] > bounds[1]   # False with a NaN end
        return _status(ok(value), ok(ci[0]), ok(ci[1]), outside, rule)

    cod_max = standards.cod_limit(property_class)
    statuses: dict[str, tuple[VerdictStatus, str, float]] = {
        "median_ratio": (in_range(study.median_ratio, study.median_ratio_ci, standards.median_ratio),
                         _range_text(*standards.median_ratio), study.median_ratio),
        "cod": (_status(study.cod <= cod_max, True, study.cod_ci[1] <= cod_max, study.cod_ci[0] > cod_max, rule),
                f"<= {_fmt(cod_max, 0)}", study.cod),
        "prd": (in_range(study.prd, study.prd_ci, standards.prd), _range_text(*standards.prd), study.prd),
        "prb": (in_range(study.prb, study.prb_ci, standards.prb), _range_text(*standards.prb), study.prb),
    }
    overrule: VerdictStatus | None = ("no_sales" if study.n == 0 else
                                      "too_few_sales" if study.n < standards.min_sales else None)
    return {k: Verdict(overrule or status, limit, value) for k, (status, limit, value) in statuses.items()}


def passes(verdicts: Mapping[str, Verdict]) -> bool:
    """True when every verdict is a pass (too few sales is not a pass)."""
    return all(v.status == "pass" for v in verdicts.values())
