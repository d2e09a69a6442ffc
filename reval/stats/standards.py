"""Ratio-study performance standards and pass / fail / too-few-sales verdicts against them.

Default limits are those of the IAAO Standard on Ratio Studies (2013), Section 9 (level, uniformity,
vertical equity) as recalled from memory (the standard's text was not at hand); the rest is marked
common practice.  Local rules may differ: every limit can be set from the `[standards]` config table.
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import TYPE_CHECKING, Any, Literal

if TYPE_CHECKING:  # only for the type hint: ratio_stats loads SciPy, which config loading does not need
    from reval.stats.ratio_stats import RatioStudy

_DEFAULT_COD_MAX: dict[str, float] = {
    "single_family": 15.0,       # IAAO: single-family, older or more heterogeneous areas, 5.0-15.0
    "townhouse": 15.0,           # common practice: judged as single-family residential
    "condominium": 15.0,         # IAAO: residential condominiums are grouped with single-family
    "residential": 15.0,         # IAAO: single-family residential, 5.0-15.0
    "newer_residential": 10.0,   # IAAO: newer or more homogeneous residential areas, 5.0-10.0
    "income": 20.0,              # IAAO: income-producing, smaller jurisdictions 5.0-20.0 (larger 5.0-15.0)
    "vacant_land": 25.0,         # IAAO: vacant land, 5.0-25.0
}
_KEYS = ("median_ratio", "cod_max", "cod_max_default", "prd", "prb", "min_sales")

STANDARDS_TOML_COMMENTED = """\
# Ratio-study performance standards. "IAAO" marks a limit from the IAAO Standard on
# Ratio Studies (2013); "common practice" marks a usual choice the standard does not fix.
# Local rules (statute, the oversight agency) may differ and then take precedence.
[standards]
median_ratio = [0.90, 1.10]    # IAAO: level, median ratio within 0.90-1.10
prd = [0.98, 1.03]             # IAAO: price-related differential within 0.98-1.03
prb = [-0.05, 0.05]            # IAAO: price-related bias coefficient within -0.05 to 0.05
min_sales = 10                 # common practice: fewer sales are reported as too few (IAAO sets no fixed minimum)
cod_max_default = 15.0         # common practice: COD limit for a property class not listed below

[standards.cod_max]            # highest acceptable COD by property class
single_family = 15.0           # IAAO: single-family, older or more heterogeneous areas, 5.0-15.0
townhouse = 15.0               # common practice: judged as single-family residential
condominium = 15.0             # IAAO: residential condominiums are judged with single-family
residential = 15.0             # IAAO: single-family residential, 5.0-15.0
newer_residential = 10.0       # IAAO: newer or more homogeneous residential areas, 5.0-10.0
income = 20.0                  # IAAO: income-producing, smaller jurisdictions 5.0-20.0 (larger ones 5.0-15.0)
vacant_land = 25.0             # IAAO: vacant land, 5.0-25.0
# IAAO: a COD below 5.0 can point to sales chasing or an unrepresentative sample; worth a look.
"""


def _number(key: str, x: Any) -> float:
    if isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x):
        raise ValueError(f"{key} must be a finite number, got {x!r}")
    return float(x)


def _range(key: str, pair: Any) -> tuple[float, float]:
    if isinstance(pair, (str, bytes)) or not isinstance(pair, (list, tuple)) or len(pair) != 2:
        raise ValueError(f"{key} must be [low, high], got {pair!r}")
    lo, hi = _number(key, pair[0]), _number(key, pair[1])
    if lo > hi:
        raise ValueError(f"{key} must be [low, high] with low <= high, got {pair!r}")
    return lo, hi


def _positive(key: str, x: Any) -> float:
    value = _number(key, x)
    if value <= 0:
        raise ValueError(f"{key} must be greater than zero, got {x!r}")
    return value


@dataclass(frozen=True)
class Standards:
    """Limits each ratio-study statistic is judged against (inclusive bounds)."""

    median_ratio: tuple[float, float] = (0.90, 1.10)   # IAAO level standard
    cod_max: Mapping[str, float] = field(default_factory=lambda: dict(_DEFAULT_COD_MAX))
    cod_max_default: float = 15.0                      # common practice, for classes not in cod_max
    prd: tuple[float, float] = (0.98, 1.03)            # IAAO
    prb: tuple[float, float] = (-0.05, 0.05)           # IAAO
    # Below this many sales every statistic is reported as too few sales.  Common practice: the IAAO
    # standard discusses sample size (small samples give unreliable statistics, so report confidence
    # intervals) but sets no fixed minimum count (from memory; its text could not be checked here).
    min_sales: int = 10

    def __post_init__(self) -> None:
        for key in ("median_ratio", "prd", "prb"):
            object.__setattr__(self, key, _range(key, getattr(self, key)))
        if not isinstance(self.cod_max, Mapping):
            raise ValueError(f"cod_max must be a table of property class = limit, got {self.cod_max!r}")
        limits = {}
        for cls, limit in self.cod_max.items():
            if not isinstance(cls, str) or not cls:
                raise ValueError(f"cod_max: property class must be a non-empty string, got {cls!r}")
            limits[cls] = _positive(f"cod_max.{cls}", limit)
        object.__setattr__(self, "cod_max", MappingProxyType(limits))
        object.__setattr__(self, "cod_max_default", _positive("cod_max_default", self.cod_max_default))
        if isinstance(self.min_sales, bool) or not isinstance(self.min_sales, int) or self.min_sales < 1:
            raise ValueError(f"min_sales must be a whole number >= 1, got {self.min_sales!r}")

    def __hash__(self) -> int:
        return hash((self.median_ratio, tuple(sorted(self.cod_max.items())), self.cod_max_default,
                     self.prd, self.prb, self.min_sales))

    def cod_limit(self, property_class: str | None) -> float:
        """Maximum COD for a property class; cod_max_default when the class is None or not listed."""
        return self.cod_max.get(property_class, self.cod_max_default) if property_class else self.cod_max_default

    @classmethod
    def from_mapping(cls, d: Mapping[str, Any]) -> Standards:
        """Build from a `[standards]` config table; classes in `cod_max` override the default limits."""
        unknown = [k for k in d if k not in _KEYS]
        if unknown:
            raise ValueError(f"unknown key '{unknown[0]}' (allowed: {', '.join(_KEYS)})")
        kw = dict(d)
        if "cod_max" in kw:
            if not isinstance(kw["cod_max"], Mapping):
                raise ValueError(f"cod_max must be a table of property class = limit, got {kw['cod_max']!r}")
            kw["cod_max"] = {**_DEFAULT_COD_MAX, **kw["cod_max"]}
        return cls(**kw)


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
