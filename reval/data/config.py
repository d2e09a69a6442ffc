"""The project config (reval.toml): each key declared once (reval.config_keys); errors name file and key.

The sections below and those of [standards] (reval.stats.standards) and [model] (reval.model.settings)
declare every key with its type, default, bounds and one-line doc; `SECTIONS` lists them in file order.
`load_config` reads them all through `read_table`; the starter file (reval.data.starter) and the README's
table (reval.data.config_doc) are written from the same list.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import logging
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from reval.config_keys import (REQUIRED, Declared, Invalid, comment_line, declared_keys, read_table, setting,
                               toml_value)
from reval.errors import ConfigError
from reval.model.settings import ModelSettings
from reval.states import ClassRule, FeatureKind, FeatureShape, RepeatSales, SearchArea
from reval.stats.standards import Standards

CONFIG_NAME = "reval.toml"


@dataclass(frozen=True)
class Jurisdiction(Declared):
    """Whose values, at which date, from which sales (the [jurisdiction] section)."""

    name: str = setting(REQUIRED, "the jurisdiction's name, shown on reports", example="My municipality",
                        active=True)
    valuation_date: dt.date = setting(REQUIRED, "the date all values and time-adjusted prices refer to",
                                      lo=dt.date(1900, 1, 1), hi=dt.date(2199, 12, 31), example=dt.date(2026, 1, 1),
                                      active=True)
    sale_window_months: int = setting(36, "sales from this many months before the valuation date", lo=1, hi=600,
                                      active=True)


# The directives DuckDB's strptime accepts (duckdb.org/docs/sql/functions/dateformat; a test checks this
# list against DuckDB itself). A sale date needs a year.
DATE_DIRECTIVES = frozenset("aAbBcdfgGhHIjmMnpSTuUVwWxXyYzZ%") | {"-d", "-j", "-m", "-y", "-H", "-I", "-M", "-S"}
_YEAR_DIRECTIVES = {"Y", "y", "-y", "G", "c", "x"}


def _date_format(value: Any, key: str) -> str | None:
    """A strptime format every directive of which DuckDB knows, naming a year."""
    if value is None:
        return None
    if not isinstance(value, str):
        raise Invalid(key, f"expected text, got {toml_value(value)}")
    directives = re.findall(r"%(-?.?)", value)
    unknown = [d for d in directives if d not in DATE_DIRECTIVES]
    if unknown:
        raise Invalid(key, f"unknown directive %{unknown[0]} in {toml_value(value)} (known: %Y %y %m %-m %d %-d "
                      "%b %B %j and the other strptime directives DuckDB reads)")
    if not _YEAR_DIRECTIVES & set(directives):
        raise Invalid(key, f"{toml_value(value)} names no year (%Y or %y)")
    return value


@dataclass(frozen=True)
class Files(Declared):
    """The input files, relative to the project folder (the [files] section)."""

    parcels: str = setting(REQUIRED, "CSV or Parquet, one row per parcel", example="parcels.csv", active=True)
    sales: str | None = setting(None, "one row per sale and parcel; leave out if the parcels file holds the sales "
                                "too (one row per sold parcel, as in research data)", example="sales.csv",
                                active=True)
    date_format: str | None = setting(None, "sale date format if not YYYY-MM-DD (strptime directives; it must "
                                      "name a year)", example="%d/%m/%Y", check=_date_format, type_text="text")
    max_amount: float = setting(1e10, "the largest sale price or prior value an import accepts", lo=0, lo_open=True)
    memory_mb: int = setting(1024, "most memory (MB) the project's DuckDB database holds; beyond it, work spills to "
                             "temporary files beside the database (reval's own arrays come on top)", lo=64, hi=1_048_576)


PRIOR_VALUE_NOTE = ("one prior value used to serve both as the prior market value and as the base of caps; "
                    "rename it prior_market_value and map the prior assessed value to prior_assessed_value")


def _column(doc: str, example: str, required: bool = False, active: bool = True) -> Any:
    """A [columns] key: the user's column name for a role."""
    return setting(REQUIRED if required else None, doc, pattern=(r"\S", "a column name"), example=example,
                   active=active)


@dataclass(frozen=True, kw_only=True)
class Columns(Declared):
    """Your column name for each role reval needs (the [columns] section)."""

    parcel_id: str = _column("the parcel's id (text: leading zeros are kept)", "parcel_id", required=True)
    segment: str = _column("the unit a model is fitted for", "neighbourhood", required=True)
    market_area: str | None = _column("the parent a thin segment borrows from", "market_area")
    property_class: str | None = _column("the property class (COD limits and caps are by class)", "property_class")
    prior_market_value: str | None = _column("the market value on the current roll (the prior-roll ratio study, the "
                                             "value review)", "prior_market_value")
    prior_assessed_value: str | None = _column("the assessed value on the current roll (the base of caps)",
                                               "prior_assessed_value", active=False)
    new_construction: str | None = _column("yes/no: new construction since the prior roll (a cap rule may leave it "
                                           "uncapped)", "new_construction", active=False)
    latitude: str | None = _column("the parcel's latitude", "latitude", active=False)
    longitude: str | None = _column("the parcel's longitude", "longitude", active=False)
    sale_id: str | None = _column("the same sale id on several parcels = a multi-parcel sale", "sale_id")
    sale_date: str = _column("the date of the sale", "sale_date", required=True)
    sale_price: str = _column("the price of the sale", "sale_price", required=True)
    sale_validity: str | None = _column("code telling arm's-length sales from others", "validity")


# Role -> required?  The roles each file's columns play; the sales file also carries parcel_id.
ROLES: dict[str, bool] = {k.name: k.required for k in declared_keys(Columns)}
SALE_ROLES: dict[str, bool] = {r: ROLES[r] for r in ("sale_id", "sale_date", "sale_price", "sale_validity")}
PARCEL_ROLES: dict[str, bool] = {r: required for r, required in ROLES.items() if r not in SALE_ROLES}


def _missing_codes(value: Any, key: str) -> tuple[str, ...]:
    """Cell values that mean "not known" for a feature: numbers (compared as numbers) or text, kept as text."""
    if not isinstance(value, (list, tuple)) or not all(
            isinstance(v, (str, int, float)) and not isinstance(v, bool) for v in value):
        raise Invalid(key, f"expected a list of numbers or text, e.g. [0] or [\"unknown\"], got {toml_value(value)}")
    return tuple(v if isinstance(v, str) else str(v) for v in value)


# How a binary feature's cell reads as 1 (yes) or 0 (no): the words import accepts (sql/queries/import_build.sql).
BINARY_WORDS: dict[str, float] = {w: 1.0 for w in ("1", "true", "yes", "y", "t")} | {
    w: 0.0 for w in ("0", "false", "no", "n", "f")}


@dataclass(frozen=True, kw_only=True)
class FeatureSpec(Declared):
    """One model feature (a [[features]] table): its name, the user's column, its type, transform, range and shape
    rule."""

    name: str = setting(REQUIRED, "the feature's name in reval", pattern=(r"^[a-z][a-z0-9_]*$",
                        "lower case letters, digits and _, starting with a letter"))
    column: str = setting("", "your column, if it differs from name", default_text="the name")
    kind: FeatureKind = setting(REQUIRED, "ordinal and categorical need levels; binary reads 0/1, yes/no, "
                                "true/false", toml="type")
    log: bool = setting(False, "model the logarithm (continuous only)")
    unit: str = setting("", "the unit its values are in, shown on plot axes and with marginal effects "
                        "(continuous only)", example="sq ft", pattern=(r"^[^\x00-\x1f]{0,20}$",
                                                                      "at most 20 characters, no control characters"))
    levels: tuple[str, ...] = setting((), "the levels, lowest first (ordinal and categorical only)")
    range: tuple[float, float] | None = setting(None, "values outside [low, high] are errors (continuous only)")
    baseline: str | None = setting(None, "the level contributions are measured from (categorical: one of levels; "
                                   'binary: "yes" or "no"), e.g. "no" for waterfront so a parcel without it shows 0; '
                                   "default: the segment's most common level", example="no")
    shape: FeatureShape = setting("free", '"increasing" or "decreasing" for a continuous or ordinal feature whose '
                                  "direction the market never reverses: its curve in every segment then never turns "
                                  'the other way, not even at the thin edges of the data; "free" lets the sales decide')
    missing: tuple[str, ...] = setting((), "cell values that mean the value is not known (e.g. [0] where 0 bedrooms "
                                       "means unknown): imported as missing, so the model fills them in and flags them",
                                       check=_missing_codes, type_text="a list of numbers or text")

    def check(self) -> None:
        if not self.column:
            object.__setattr__(self, "column", self.name)
        listed = self.kind in ("ordinal", "categorical")
        if listed and len(self.levels) < 2:
            raise Invalid("levels", f"a {self.kind} feature needs its levels (at least two)")
        if not listed and self.levels:
            raise Invalid("levels", f"levels only apply to ordinal and categorical features, not {self.kind}")
        if len(set(self.levels)) != len(self.levels):
            raise Invalid("levels", "levels repeat")
        if self.kind != "continuous" and (self.log or self.range or self.unit):
            key = "log" if self.log else "range" if self.range else "unit"
            raise Invalid(key, "only continuous features take log, range or unit")
        if self.log and self.range and self.range[0] < 0:
            raise Invalid("range", "a log-transformed feature cannot have negative values")
        if self.baseline is not None and self.kind not in ("categorical", "binary"):
            raise Invalid("baseline", f"only categorical and binary features take a baseline, not {self.kind}")
        if self.kind == "categorical" and self.baseline is not None and self.baseline not in self.levels:
            raise Invalid("baseline", f"'{self.baseline}' is not one of the levels")
        if self.kind == "binary" and self.baseline is not None and self.baseline.lower() not in BINARY_WORDS:
            raise Invalid("baseline", f"'{self.baseline}' is not a yes/no value ({', '.join(BINARY_WORDS)})")
        if self.shape != "free" and self.kind not in ("continuous", "ordinal"):
            raise Invalid("shape", f"only continuous and ordinal features take a shape rule, not {self.kind}")
        clash = [code for code in self.missing if code in self.levels]
        if clash:
            raise Invalid("missing", f"'{clash[0]}' is one of the levels; a level cannot also mean missing")


@dataclass(frozen=True)
class SalesRules(Declared):
    """Which sales qualify for models and ratio studies (the [sales] section)."""

    validity_codes_kept: tuple[str, ...] | None = setting(None, "leave out to keep every code", example=("valid",),
                                                          active=True)
    price_min: float | None = setting(None, "sales below this price are left out", lo=0, example=10000)
    price_max: float | None = setting(None, "sales above this price are left out", lo=0, lo_open=True,
                                      example=5000000)
    property_classes: tuple[str, ...] | None = setting(None, "only sales of these classes (leave out: every class)",
                                                       example=("single_family", "condominium"))
    exclude_multi_parcel: bool = setting(True, "leave out sales that cover several parcels (false: studies compare "
                                         "a package's summed values with its one price)", active=True)
    multi_parcel_in_fit: bool = setting(False, "when multi-parcel sales qualify, also fit each parcel at its share "
                                        "of the price (by prior value)")
    repeat_sales: RepeatSales = setting("latest", '"latest": of a parcel sold more than once in the sale window, only '
                                        'its latest sale that passes the other rules counts (the others: "earlier '
                                        'repeat sale"; two on one day: one is kept); "all" keeps every sale')
    require_features: tuple[str, ...] = setting((), "sales of parcels missing any of these features are left out "
                                                "(a filled-in value would stand in for what the buyer paid for)",
                                                example=("living_area",))

    def check(self) -> None:
        if self.price_min is not None and self.price_max is not None and self.price_min > self.price_max:
            raise Invalid("price_min", "is above sales.price_max")


def _feature_name(doc: str, default: str) -> Any:
    """A [check] key naming the feature that plays a role in the combination checks."""
    return setting(default, doc + " (a continuous feature; checks that need a missing one are listed as not run)",
                   pattern=(r"^[a-z][a-z0-9_]*$", "a feature name"))


@dataclass(frozen=True)
class CheckSettings(Declared):
    """What `reval check` looks for besides blanks and ranges (the [check] section). The limits are common
    practice, not from a standard: set them to what your office finds plausible."""

    living_area: str = _feature_name("the feature holding the living area", "living_area")
    bathrooms: str = _feature_name("the feature holding the number of bathrooms", "bathrooms")
    year_built: str = _feature_name("the feature holding the year built", "year_built")
    min_area_per_bathroom: float = setting(150.0, "list parcels with less living area per bathroom than this (in "
                                           "the living area's unit)", lo=0)
    price_per_area_factor: float = setting(3.0, "list sales whose price per unit of living area is more than this "
                                           "many times the segment's median, or less than the median divided by it",
                                           lo=1, lo_open=True)
    price_to_prior_factor: float = setting(3.0, "list sales whose price is more than this many times the prior "
                                           "value, or less than the prior value divided by it", lo=1, lo_open=True)


@dataclass(frozen=True)
class TimeSettings(Declared):
    """Market-trend estimation (the [time_adjustment] section)."""

    by_market_area: bool = setting(False, "a trend per market area where it has enough sales")
    min_sales_market_area: int = setting(400, "sales a market area needs for its own trend", lo=1)
    n_basis: int = setting(10, "spline basis functions of the monthly trend", lo=4, hi=100)


@dataclass(frozen=True)
class StudySettings(Declared):
    """Ratio-study options (the [study] section)."""

    trim_iqr_k: float | None = setting(None, "trim ratios outside Q1 - k*IQR .. Q3 + k*IQR (listed, never silent); "
                                       "leave out to keep every sale", lo=0, lo_open=True, example=3.0)
    confidence: float = setting(0.95, "level of the confidence intervals", lo=0.5, hi=1, lo_open=True, hi_open=True)
    bootstrap: int = setting(1000, "resamples for the COD and PRD confidence intervals", lo=100, hi=100_000)
    seed: int = setting(2026, "seed of the bootstrap, so studies are reproducible", lo=0)
    age_feature: str = setting("year_built", "the feature whose decade groups sales by age (`--by age`); "
                               "that grouping is skipped when no such feature is declared")
    size_feature: str = setting("living_area", "the feature whose quintile bands group sales by size (`--by size`); "
                                "that grouping is skipped when no such feature is declared")


@dataclass(frozen=True, kw_only=True)
class CapRule(Declared):
    """One cap on the yearly change of assessed values (an [[assessment.caps]] table). Local law decides whether
    and how values are capped; every form is off unless a rule sets it."""

    property_classes: tuple[str, ...] | None = setting(None, "the classes it applies to (leave out: every class "
                                                       "no other rule names)", example=("single_family",))
    max_increase: float | None = setting(None, "assessed value at most prior assessed value x (1 + max_increase)",
                                         lo=0, example=0.10)
    max_decrease: float | None = setting(None, "assessed value at least prior assessed value x (1 - max_decrease) "
                                         "(leave out: decreases are not limited)", lo=0, hi=1, example=0.10)
    exclude_new_construction: bool = setting(False, "parcels flagged in [columns] new_construction are not capped",
                                             example=True)
    reset_on_sale: bool = setting(False, "parcels sold after [assessment] prior_roll_date are not capped",
                                  example=True)

    def check(self) -> None:
        if self.max_increase is None and self.max_decrease is None:
            raise Invalid("max_increase", "a cap needs max_increase, max_decrease or both")


def _caps(value: Any, key: str) -> tuple[Mapping[str, Any], ...]:
    """The [[assessment.caps]] tables, checked, as plain tables (the form reval.roll.valuation reads)."""
    if not isinstance(value, (list, tuple)):
        raise Invalid(key, "must be an array of tables ([[assessment.caps]])")
    caps = []
    for i, item in enumerate(value):
        rule = read_table(CapRule, dict(item) if isinstance(item, Mapping) else item, f"{key}[{i}]")
        named = {} if rule.property_classes is None else {"property_classes": list(rule.property_classes)}
        caps.append({**named, **{k.name: getattr(rule, k.attribute) for k in declared_keys(CapRule)
                                 if k.name != "property_classes" and getattr(rule, k.attribute) not in (None, False)}})
    return tuple(caps)


def _caps_starter() -> list[str]:
    lines = ["# A cap on the yearly change of assessed values for some property classes (repeat the table for more "
             "rules;", "# a class takes the first rule naming it, else the first naming no class). Local law decides whether "
             "and how:",
             "# [[assessment.caps]]"]
    return lines + [comment_line(f"# {k.name} = {toml_value(k.spec.example)}", k.spec.doc) for k in declared_keys(CapRule)]


@dataclass(frozen=True)
class AssessmentSettings(Declared):
    """Rules from local law for turning market values into assessed values (the [assessment] section)."""

    level: float = setting(1.0, "assessment level: assessed value = market value x level", lo=0, hi=1, lo_open=True)
    rounding: float = setting(100.0, "round values to this unit (0 = no rounding)", lo=0, hi=10_000, example=100)
    land_schedule: str | None = setting(None, "CSV: segment, base_<lot feature>, base_land_value, size_exponent; "
                                        "land = base_land_value x (lot / base lot) ^ size_exponent",
                                        example="land_schedule.csv")
    review_change_threshold: float = setting(0.25, "list parcels whose value changes by more than this share "
                                             "(0.25 = 25 %)", lo=0)
    prior_roll_date: dt.date | None = setting(None, "the date of the prior roll: a cap with reset_on_sale lifts for "
                                              "parcels sold after it", example=dt.date(2025, 1, 1))
    caps: tuple[Mapping[str, Any], ...] = setting((), "caps on the yearly change of assessed values by property "
                                                  "class, measured from the prior assessed value; all off by default",
                                                  check=_caps, starter=_caps_starter, items=CapRule)

    def check(self) -> None:
        if any(cap.get("reset_on_sale") for cap in self.caps) and self.prior_roll_date is None:
            raise Invalid("prior_roll_date", "a cap with reset_on_sale needs the date of the prior roll")


@dataclass(frozen=True)
class ComparablesSettings(Declared):
    """How comparable sales are chosen and adjusted to a parcel (the [comparables] section)."""

    k: int = setting(5, "comparable sales shown for a parcel", lo=1, hi=20, active=True)
    widen_below: int = setting(20, "search the parcel's segment; with fewer candidate sales than this, its market "
                               "area; then, if `widest` allows, the whole jurisdiction", lo=1, hi=100_000)
    widest: SearchArea = setting("market_area", 'how far the search may widen: "segment", "market_area" or '
                                 '"jurisdiction"')
    max_age_months: int | None = setting(None, "only sales at most this many months before the valuation date "
                                         "(leave out: the whole sale window)", lo=1, hi=600, example=24)
    segment_weight: float = setting(0.10, "added to the distance of a sale outside the parcel's segment (log units, "
                                    "like a 10 % difference in one feature's contribution)", lo=0, hi=10)
    market_area_weight: float = setting(0.20, "added to the distance of a sale outside the parcel's market area "
                                        "(log units)", lo=0, hi=10)
    age_weight: float = setting(0.05, "added to the distance per year between the sale and the valuation date "
                                "(log units): recent sales are preferred", lo=0, hi=10)
    max_gross_adjustment: float = setting(0.40, "sales needing a larger gross adjustment (sum of the rows' absolute "
                                          "amounts / time-adjusted price) come only after every sale within it, "
                                          "and are marked", lo=0, lo_open=True, hi=100)
    min_fit_weight: float = setting(0.5, "sales the run's fit gave less weight than this (a doubtful price) are not "
                                    "offered as comparables", lo=0, hi=1)


@dataclass(frozen=True)
class ClassRules(Declared):
    """How each property class is valued (the [classes] section); a class named in neither list is valued by the
    model, and the model is fitted on the sales of those classes alone."""

    land_schedule: tuple[str, ...] = setting((), "classes valued by the land schedule alone (vacant land): the "
                                             "value is the land value, the improvement 0", example=("vacant_land",))
    not_valued: tuple[str, ...] = setting((), "classes left for a manual value: flagged on the roll, their segment "
                                          "cannot be approved until each is valued or removed from the data",
                                          example=("special_purpose",))

    def check(self) -> None:
        both = sorted(set(self.land_schedule) & set(self.not_valued))
        if both:
            raise Invalid("not_valued", f"class '{both[0]}' is also in classes.land_schedule")

    def rule(self, property_class: str) -> ClassRule:
        """How parcels of a class are valued."""
        if property_class in self.land_schedule:
            return "land_schedule"
        return "not_valued" if property_class in self.not_valued else "model"


def _reason_codes(value: Any, key: str) -> tuple[str, ...]:
    """Override reason codes: a non-empty list of distinct plain codes (letters, digits, underscores)."""
    if not isinstance(value, (list, tuple)) or not value or not all(isinstance(v, str) for v in value):
        raise Invalid(key, f"expected a non-empty list of codes, got {toml_value(value)}")
    bad = [v for v in value if not re.fullmatch(r"[a-z][a-z0-9_]*", v)]
    if bad:
        raise Invalid(key, f"code {bad[0]!r} must be lower-case letters, digits and underscores")
    if len(set(value)) != len(value):
        raise Invalid(key, "a code is listed twice")
    return tuple(value)


@dataclass(frozen=True)
class OverrideSettings(Declared):
    """Values set by the analyst over the model's (the [overrides] section)."""

    reasons: tuple[str, ...] = setting(("informal_review", "appeal_decision", "data_correction", "manual_value"),
                                       "the reason codes `reval override --reason` accepts", check=_reason_codes)


@dataclass(frozen=True)
class Section:
    """A section of reval.toml: its table, its declared keys and the words the starter writes above it."""

    name: str
    cls: type[Declared]
    intro: str
    required: bool = False
    array: bool = False                                  # an array of tables ([[name]])
    examples: tuple[Mapping[str, Any], ...] = ()         # the starter's tables of an array


SECTIONS: tuple[Section, ...] = (
    Section("jurisdiction", Jurisdiction, "", required=True),
    Section("files", Files, "", required=True),
    Section("columns", Columns, "Your column names (right) for each role (left). Required: parcel_id, segment, "
            "and for sales sale_date and sale_price. The others are optional.", required=True),
    Section("features", FeatureSpec, "Model features: type is continuous, ordinal (with its levels, lowest first), "
            "categorical (with its levels) or binary (0/1, yes/no, true/false).", array=True,
            examples=({"name": "living_area", "type": "continuous", "log": True, "range": [100, 20000],
                       "shape": "increasing"},
                      {"name": "quality", "type": "ordinal", "levels": ["low", "average", "good", "excellent"],
                       "shape": "increasing"})),
    Section("sales", SalesRules, "Which sales qualify for models and ratio studies."),
    Section("check", CheckSettings, "The data-quality check (`reval check`): which features the combination checks "
            "read, and when a value is implausible."),
    Section("time_adjustment", TimeSettings, "Market-trend estimation for time adjustment to the valuation date."),
    Section("study", StudySettings, "Ratio studies."),
    Section("standards", Standards, 'Ratio-study performance standards. "IAAO" marks a limit from the IAAO Standard '
            'on Ratio Studies (2013); "common practice" marks a usual choice the standard does not fix. Local rules '
            "(statute, the oversight agency) may differ and then take precedence."),
    Section("model", ModelSettings, "Modelling choices shared by every segment of a run."),
    Section("assessment", AssessmentSettings, "Rules from local law: the office sets these."),
    Section("comparables", ComparablesSettings, "Comparable sales for defending a parcel's value: the sales most "
            "similar in what the model says matters, adjusted to the parcel by the model."),
    Section("classes", ClassRules, "How each property class is valued: by the model (every class not named here), "
            "by the land schedule alone, or not at all (left for a manual value)."),
    Section("overrides", OverrideSettings, "Values the analyst sets over the model's, each with a reason code."),
)


@dataclass(frozen=True)
class Config:
    """A validated reval.toml and the folder it lives in."""

    path: Path
    jurisdiction: str
    valuation_date: dt.date
    sale_window_months: int
    parcels_file: Path
    sales_file: Path | None
    date_format: str | None
    columns: Mapping[str, str]
    features: tuple[FeatureSpec, ...]
    sales: SalesRules = field(default_factory=SalesRules)
    check: CheckSettings = field(default_factory=CheckSettings)
    time: TimeSettings = field(default_factory=TimeSettings)
    study: StudySettings = field(default_factory=StudySettings)
    standards: Standards = field(default_factory=Standards)
    model: ModelSettings = field(default_factory=ModelSettings)
    assessment: AssessmentSettings = field(default_factory=AssessmentSettings)
    comparables: ComparablesSettings = field(default_factory=ComparablesSettings)
    classes: ClassRules = field(default_factory=ClassRules)
    overrides: OverrideSettings = field(default_factory=OverrideSettings)
    max_amount: float = 1e10      # [files] max_amount
    memory_mb: int = 1024         # [files] memory_mb
    sha256: str = ""

    @property
    def folder(self) -> Path:
        return self.path.parent

    @property
    def database(self) -> Path:
        return self.folder / "reval.duckdb"

    @property
    def sales_source(self) -> Path:
        """The file holding the sales: the sales file, or the parcels file when it holds both."""
        return self.sales_file or self.parcels_file

    @property
    def sale_window_start(self) -> dt.date:
        """First day of the sale window: the valuation date minus the window's months."""
        months = self.valuation_date.year * 12 + self.valuation_date.month - 1 - self.sale_window_months
        return dt.date(months // 12, months % 12 + 1, min(self.valuation_date.day, 28))


def load_config(path: Path | str) -> Config:
    """Read and validate a reval.toml; raise ConfigError naming the file and the key on any problem."""
    path = Path(path).resolve()
    if path.is_dir():
        path = path / CONFIG_NAME
    if not path.is_file():
        raise ConfigError(path, "", f"no {CONFIG_NAME} here; create one with `reval init DIR`")
    raw_bytes = path.read_bytes()
    data = _parse(path, raw_bytes)
    try:
        sections = _read_sections(data)
        files: Files = sections["files"]
        jurisdiction: Jurisdiction = sections["jurisdiction"]
        parcels_file = _input_file(path, files.parcels, "files.parcels")
        sales_file = None if files.sales is None else _input_file(path, files.sales, "files.sales")
        _check_across(sections)
    except Invalid as exc:
        raise ConfigError(path, exc.key, exc.problem) from None
    columns = {k.name: getattr(sections["columns"], k.attribute) for k in declared_keys(Columns)}
    caps = sections["assessment"].caps
    if caps and columns["prior_assessed_value"] is None:
        raise ConfigError(path, "columns.prior_assessed_value", "caps compare assessed values with the prior assessed "
                          "value: map its column (the prior market value is not the base of a cap)")
    if any(cap.get("exclude_new_construction") for cap in caps) and columns["new_construction"] is None:
        raise ConfigError(path, "columns.new_construction", "a cap with exclude_new_construction needs the column "
                          "that flags new construction")
    return Config(
        path=path,
        jurisdiction=jurisdiction.name,
        valuation_date=jurisdiction.valuation_date,
        sale_window_months=jurisdiction.sale_window_months,
        parcels_file=parcels_file,
        sales_file=sales_file,
        date_format=files.date_format,
        columns={role: column for role, column in columns.items() if column is not None},
        features=sections["features"],
        sales=sections["sales"],
        check=sections["check"],
        time=sections["time_adjustment"],
        study=sections["study"],
        standards=sections["standards"],
        model=sections["model"],
        assessment=sections["assessment"],
        comparables=sections["comparables"],
        classes=sections["classes"],
        overrides=sections["overrides"],
        max_amount=files.max_amount,
        memory_mb=files.memory_mb,
        sha256=hashlib.sha256(raw_bytes).hexdigest(),
    )


def _check_across(sections: dict[str, Any]) -> None:
    """Checks between sections: required features and the location surface's must be declared; land-valued classes
    need a land schedule."""
    names = {f.name for f in sections["features"]}
    unknown = [n for n in sections["sales"].require_features if n not in names]
    if unknown:
        raise Invalid("sales.require_features", f"'{unknown[0]}' is not a declared feature "
                      f"(features: {', '.join(sorted(names)) or 'none'})")
    kinds = {f.name: f.kind for f in sections["features"]}
    for n in sections["model"].location_surface:
        if kinds.get(n) != "continuous":
            raise Invalid("model.location_surface", f"'{n}' is not a declared continuous feature "
                          f"(continuous features: {', '.join(sorted(k for k, v in kinds.items() if v == 'continuous')) or 'none'})")
    if sections["classes"].land_schedule and sections["assessment"].land_schedule is None:
        raise Invalid("classes.land_schedule", "classes valued by the land schedule need assessment.land_schedule")


def _parse(path: Path, raw_bytes: bytes) -> dict[str, Any]:
    """The TOML tree; text that is not UTF-8 or not TOML is refused naming the line and column."""
    try:
        text = raw_bytes.decode("utf-8")
    except UnicodeDecodeError as exc:
        before = raw_bytes[: exc.start]
        line, column = before.count(b"\n") + 1, exc.start - (before.rfind(b"\n") + 1) + 1
        raise ConfigError(path, "", f"line {line}, column {column}: not UTF-8 text (byte 0x{raw_bytes[exc.start]:02x}); "
                          "save the file as UTF-8") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(path, "", f"not valid TOML: {exc}") from None


def _read_sections(data: dict[str, Any]) -> dict[str, Any]:
    """Every section, read through its declaration; missing optional sections take their defaults."""
    known = [s.name for s in SECTIONS]
    unknown = sorted(set(data) - set(known))
    if unknown:
        raise Invalid(f"(top level).{unknown[0]}", f"unknown key (allowed: {', '.join(known)})")
    out: dict[str, Any] = {}
    for section in SECTIONS:
        raw = _renamed(data.get(section.name)) if section.name == "columns" else data.get(section.name)
        if raw is None and section.required:
            raise Invalid(section.name, "missing section")
        if section.array:
            out[section.name] = _read_array(section, [] if raw is None else raw)
        else:
            out[section.name] = read_table(section.cls, {} if raw is None else raw, section.name)
    return out


def _renamed(columns: Any) -> Any:
    """[columns] with the deprecated key prior_value read as prior_market_value (a notice says so). It is kept,
    not refused, so existing projects still open; caps, its other old use, now refuse to run without
    prior_assessed_value, so nothing is silently left uncapped."""
    if not isinstance(columns, dict) or "prior_value" not in columns:
        return columns
    if "prior_market_value" in columns:
        raise Invalid("columns.prior_value", f"give prior_market_value alone ({PRIOR_VALUE_NOTE})")
    logging.getLogger("reval").warning("[columns] prior_value is deprecated and read as prior_market_value: %s.",
                                       PRIOR_VALUE_NOTE)
    return {("prior_market_value" if k == "prior_value" else k): v for k, v in columns.items()}


def _read_array(section: Section, raw: Any) -> tuple[Any, ...]:
    if not isinstance(raw, list):
        raise Invalid(section.name, f"must be an array of tables ([[{section.name}]])")
    items = tuple(read_table(section.cls, item, f"{section.name}[{i}]") for i, item in enumerate(raw))
    names = [getattr(item, "name") for item in items]
    twice = sorted({n for n in names if names.count(n) > 1})
    if twice:
        raise Invalid(section.name, f"feature '{twice[0]}' is declared twice")
    return items


def _input_file(config_path: Path, name: str, key: str) -> Path:
    file = (config_path.parent / name).resolve()
    if file.suffix.lower() not in (".csv", ".parquet"):
        raise Invalid(key, f"'{name}' must be a .csv or .parquet file")
    if not file.exists():
        raise Invalid(key, f"file not found: {file}")
    return file
