"""The project config (reval.toml): a typed, validated model; every error names the file and the key."""
from __future__ import annotations

import datetime as dt
import hashlib
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Literal, Mapping

from reval.errors import ConfigError
from reval.model.settings import ModelSettings
from reval.stats.standards import Standards

CONFIG_NAME = "reval.toml"
FeatureKind = Literal["continuous", "ordinal", "categorical", "binary"]
FEATURE_KINDS: tuple[str, ...] = ("continuous", "ordinal", "categorical", "binary")
NAME_PATTERN = re.compile(r"^[a-z][a-z0-9_]*$")

# Role -> required?  Roles are what reval needs; the values in [columns] are the user's own column names.
PARCEL_ROLES: dict[str, bool] = {
    "parcel_id": True,
    "segment": True,
    "market_area": False,
    "property_class": False,
    "prior_value": False,
    "latitude": False,
    "longitude": False,
}
SALE_ROLES: dict[str, bool] = {
    "sale_id": False,
    "sale_date": True,
    "sale_price": True,
    "sale_validity": False,
}


@dataclass(frozen=True)
class FeatureSpec:
    """One model feature: its name in reval, the user's column, its type, transform and valid range."""

    name: str
    column: str
    kind: FeatureKind
    log: bool = False
    levels: tuple[str, ...] = ()
    range: tuple[float, float] | None = None


@dataclass(frozen=True)
class SalesRules:
    """Which sales qualify for models and ratio studies (the [sales] section)."""

    validity_codes_kept: tuple[str, ...] | None = None
    price_min: float | None = None
    price_max: float | None = None
    property_classes: tuple[str, ...] | None = None
    exclude_multi_parcel: bool = True


@dataclass(frozen=True)
class TimeSettings:
    """Market-trend estimation (the [time_adjustment] section)."""

    by_market_area: bool = False
    min_sales_market_area: int = 400
    n_basis: int = 10


@dataclass(frozen=True)
class StudySettings:
    """Ratio-study options (the [study] section)."""

    trim_iqr_k: float | None = None
    confidence: float = 0.95
    bootstrap: int = 1000
    seed: int = 2026


@dataclass(frozen=True)
class AssessmentSettings:
    """Rules from local law for turning market values into assessed values (the [assessment] section)."""

    level: float = 1.0
    rounding: float = 100.0
    land_schedule: str | None = None
    review_change_threshold: float = 0.25
    caps: tuple[Mapping[str, Any], ...] = ()


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
    time: TimeSettings = field(default_factory=TimeSettings)
    study: StudySettings = field(default_factory=StudySettings)
    standards: Standards = field(default_factory=Standards)
    model: ModelSettings = field(default_factory=ModelSettings)
    assessment: AssessmentSettings = field(default_factory=AssessmentSettings)
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


class _Reader:
    """Walks the TOML tree, checking keys and types and naming the full key in every error."""

    def __init__(self, path: Path) -> None:
        self.path = path

    def fail(self, key: str, problem: str) -> ConfigError:
        return ConfigError(self.path, key, problem)

    def section(self, data: Mapping[str, Any], name: str, allowed: set[str], required: bool = False) -> dict[str, Any]:
        raw = data.get(name)
        if raw is None:
            if required:
                raise self.fail(name, "missing section")
            return {}
        if not isinstance(raw, dict):
            raise self.fail(name, "must be a table")
        self.no_unknown(raw, allowed, name)
        return raw

    def no_unknown(self, raw: Mapping[str, Any], allowed: set[str], prefix: str) -> None:
        unknown = sorted(set(raw) - allowed)
        if unknown:
            raise self.fail(f"{prefix}.{unknown[0]}", f"unknown key (allowed: {', '.join(sorted(allowed))})")

    def get(self, raw: Mapping[str, Any], prefix: str, key: str, kind: type | tuple[type, ...], default: Any = ...) -> Any:
        if key not in raw:
            if default is ...:
                raise self.fail(f"{prefix}.{key}", "missing")
            return default
        value = raw[key]
        if kind is float and isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        if isinstance(value, bool) and kind is not bool and bool not in (kind if isinstance(kind, tuple) else (kind,)):
            raise self.fail(f"{prefix}.{key}", f"expected {_kind_name(kind)}, got a boolean")
        if not isinstance(value, kind):
            raise self.fail(f"{prefix}.{key}", f"expected {_kind_name(kind)}, got {type(value).__name__}")
        return value

    def strings(self, raw: Mapping[str, Any], prefix: str, key: str) -> tuple[str, ...] | None:
        value = raw.get(key)
        if value is None:
            return None
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise self.fail(f"{prefix}.{key}", "expected a list of strings")
        return tuple(value)

    def pair(self, raw: Mapping[str, Any], prefix: str, key: str) -> tuple[float, float] | None:
        value = raw.get(key)
        if value is None:
            return None
        ok = isinstance(value, list) and len(value) == 2 and all(_is_number(v) for v in value)
        if not ok or value[0] > value[1]:
            raise self.fail(f"{prefix}.{key}", "expected [low, high] with low <= high")
        return float(value[0]), float(value[1])

    def delegate(self, data: Mapping[str, Any], name: str, build: Callable[[Mapping[str, Any]], Any]) -> Any:
        """Build a section whose keys another module owns and checks, naming this file in its errors."""
        raw = data.get(name, {})
        if not isinstance(raw, dict):
            raise self.fail(name, "must be a table")
        try:
            return build(raw)
        except ValueError as exc:
            raise self.fail(name, str(exc)) from None


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _kind_name(kind: type | tuple[type, ...]) -> str:
    kinds = kind if isinstance(kind, tuple) else (kind,)
    names = {str: "a string", int: "a whole number", float: "a number", bool: "true or false",
             dt.date: "a date (YYYY-MM-DD)", list: "a list", dict: "a table"}
    return " or ".join(names.get(k, k.__name__) for k in kinds)


def load_config(path: Path | str) -> Config:
    """Read and validate a reval.toml; raise ConfigError naming the file and key on any problem."""
    path = Path(path).resolve()
    if path.is_dir():
        path = path / CONFIG_NAME
    if not path.exists():
        raise ConfigError(path, "-", f"no {CONFIG_NAME} here; create one with `reval init DIR`")
    raw_bytes = path.read_bytes()
    try:
        data = tomllib.loads(raw_bytes.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ConfigError(path, "-", f"not valid TOML: {exc}") from None
    r = _Reader(path)
    r.no_unknown(data, {"jurisdiction", "files", "columns", "features", "sales", "time_adjustment",
                        "study", "standards", "model", "assessment"}, "(top level)")

    j = r.section(data, "jurisdiction", {"name", "valuation_date", "sale_window_months"}, required=True)
    valuation_date = r.get(j, "jurisdiction", "valuation_date", dt.date)
    if isinstance(valuation_date, dt.datetime):
        raise r.fail("jurisdiction.valuation_date", "expected a date without a time (YYYY-MM-DD)")
    window = r.get(j, "jurisdiction", "sale_window_months", int, 36)
    if window <= 0:
        raise r.fail("jurisdiction.sale_window_months", "must be positive")

    f = r.section(data, "files", {"parcels", "sales", "date_format"}, required=True)
    parcels_file = _input_file(r, path, f, "parcels", required=True)
    if parcels_file is None:  # required: _input_file raised already
        raise r.fail("files.parcels", "missing")
    sales_file = _input_file(r, path, f, "sales", required=False)

    columns = _columns(r, data)
    features = _features(r, data)
    return Config(
        path=path,
        jurisdiction=r.get(j, "jurisdiction", "name", str),
        valuation_date=valuation_date,
        sale_window_months=window,
        parcels_file=parcels_file,
        sales_file=sales_file,
        date_format=r.get(f, "files", "date_format", str, None),
        columns=columns,
        features=features,
        sales=_sales_rules(r, data),
        time=_time_settings(r, data),
        study=_study_settings(r, data),
        standards=r.delegate(data, "standards", Standards.from_mapping),
        model=r.delegate(data, "model", ModelSettings.from_mapping),
        assessment=_assessment(r, data),
        sha256=hashlib.sha256(raw_bytes).hexdigest(),
    )


def _input_file(r: _Reader, config_path: Path, f: Mapping[str, Any], key: str, required: bool) -> Path | None:
    name = r.get(f, "files", key, str, ... if required else None)
    if name is None:
        return None
    file = (config_path.parent / name).resolve()
    if file.suffix.lower() not in (".csv", ".parquet"):
        raise r.fail(f"files.{key}", f"'{name}' must be a .csv or .parquet file")
    if not file.exists():
        raise r.fail(f"files.{key}", f"file not found: {file}")
    return file


def _columns(r: _Reader, data: Mapping[str, Any]) -> dict[str, str]:
    roles = {**PARCEL_ROLES, **SALE_ROLES}
    c = r.section(data, "columns", set(roles), required=True)
    out: dict[str, str] = {}
    for role, required in roles.items():
        value = r.get(c, "columns", role, str, ... if required else None)
        if value is not None:
            if not value.strip():
                raise r.fail(f"columns.{role}", "column name is empty")
            out[role] = value
    return out


def _features(r: _Reader, data: Mapping[str, Any]) -> tuple[FeatureSpec, ...]:
    raw = data.get("features", [])
    if not isinstance(raw, list):
        raise r.fail("features", "must be an array of tables ([[features]])")
    specs: list[FeatureSpec] = []
    for i, item in enumerate(raw):
        key = f"features[{i}]"
        if not isinstance(item, dict):
            raise r.fail(key, "must be a table")
        r.no_unknown(item, {"name", "column", "type", "log", "levels", "range"}, key)
        name = r.get(item, key, "name", str)
        if not NAME_PATTERN.match(name):
            raise r.fail(f"{key}.name", f"'{name}' must be lower case letters, digits and _")
        kind = r.get(item, key, "type", str)
        if kind not in FEATURE_KINDS:
            raise r.fail(f"{key}.type", f"'{kind}' is not one of {', '.join(FEATURE_KINDS)}")
        levels = r.strings(item, key, "levels") or ()
        if kind in ("ordinal", "categorical") and len(levels) < 2:
            raise r.fail(f"{key}.levels", f"a {kind} feature needs its levels (at least two)")
        if kind not in ("ordinal", "categorical") and levels:
            raise r.fail(f"{key}.levels", f"levels only apply to ordinal and categorical features, not {kind}")
        if len(set(levels)) != len(levels):
            raise r.fail(f"{key}.levels", "levels repeat")
        log = r.get(item, key, "log", bool, False)
        rng = r.pair(item, key, "range")
        if kind != "continuous" and (log or rng):
            raise r.fail(f"{key}.{'log' if log else 'range'}", "only continuous features take log or range")
        if log and rng and rng[0] < 0:
            raise r.fail(f"{key}.range", "a log-transformed feature cannot have negative values")
        specs.append(FeatureSpec(name, r.get(item, key, "column", str, name), kind, log, levels, rng))
    names = [s.name for s in specs]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise r.fail("features", f"feature '{dupes[0]}' is declared twice")
    return tuple(specs)


def _sales_rules(r: _Reader, data: Mapping[str, Any]) -> SalesRules:
    s = r.section(data, "sales", {"validity_codes_kept", "price_min", "price_max", "property_classes",
                                  "exclude_multi_parcel"})
    rules = SalesRules(
        validity_codes_kept=r.strings(s, "sales", "validity_codes_kept"),
        price_min=r.get(s, "sales", "price_min", float, None),
        price_max=r.get(s, "sales", "price_max", float, None),
        property_classes=r.strings(s, "sales", "property_classes"),
        exclude_multi_parcel=r.get(s, "sales", "exclude_multi_parcel", bool, True),
    )
    if rules.price_min is not None and rules.price_max is not None and rules.price_min > rules.price_max:
        raise r.fail("sales.price_min", "is above sales.price_max")
    return rules


def _time_settings(r: _Reader, data: Mapping[str, Any]) -> TimeSettings:
    t = r.section(data, "time_adjustment", {"by_market_area", "min_sales_market_area", "n_basis"})
    out = TimeSettings(
        by_market_area=r.get(t, "time_adjustment", "by_market_area", bool, False),
        min_sales_market_area=r.get(t, "time_adjustment", "min_sales_market_area", int, 400),
        n_basis=r.get(t, "time_adjustment", "n_basis", int, 10),
    )
    if out.n_basis < 4:
        raise r.fail("time_adjustment.n_basis", "needs at least 4 basis functions")
    return out


def _study_settings(r: _Reader, data: Mapping[str, Any]) -> StudySettings:
    s = r.section(data, "study", {"trim_iqr_k", "confidence", "bootstrap", "seed"})
    out = StudySettings(
        trim_iqr_k=r.get(s, "study", "trim_iqr_k", float, None),
        confidence=r.get(s, "study", "confidence", float, 0.95),
        bootstrap=r.get(s, "study", "bootstrap", int, 1000),
        seed=r.get(s, "study", "seed", int, 2026),
    )
    if not 0.5 < out.confidence < 1:
        raise r.fail("study.confidence", "must be between 0.5 and 1")
    if out.trim_iqr_k is not None and out.trim_iqr_k <= 0:
        raise r.fail("study.trim_iqr_k", "must be positive (leave it out to keep every sale)")
    if out.bootstrap < 0:
        raise r.fail("study.bootstrap", "cannot be negative")
    return out


def _assessment(r: _Reader, data: Mapping[str, Any]) -> AssessmentSettings:
    a = r.section(data, "assessment", {"level", "rounding", "land_schedule", "review_change_threshold", "caps"})
    caps = a.get("caps", [])
    if not isinstance(caps, list) or not all(isinstance(c, dict) for c in caps):
        raise r.fail("assessment.caps", "must be an array of tables ([[assessment.caps]])")
    for i, cap in enumerate(caps):
        r.no_unknown(cap, {"property_classes", "max_increase"}, f"assessment.caps[{i}]")
        r.get(cap, f"assessment.caps[{i}]", "max_increase", float)
    out = AssessmentSettings(
        level=r.get(a, "assessment", "level", float, 1.0),
        rounding=r.get(a, "assessment", "rounding", float, 100.0),
        land_schedule=r.get(a, "assessment", "land_schedule", str, None),
        review_change_threshold=r.get(a, "assessment", "review_change_threshold", float, 0.25),
        caps=tuple(caps),
    )
    if out.level <= 0:
        raise r.fail("assessment.level", "must be positive")
    return out
