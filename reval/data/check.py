"""The data-quality check before fitting (`reval check`): every problem an assessor should look at, per segment.

Set-based SQL fills the temporary table check_rows (sql/queries/check_*.sql), one row per problem: the parcel
(and sale), its segment, the check's code, the feature, the value and a readable problem. Nothing in the
database changes, so the check runs on a read-only connection, as often as wanted. The sold parcels a segment's
range comes from are those with a qualified sale after `reval sales` (run on the sales imported now), else those
sold in the sale window. The limits of the combination checks are in [check] (common practice: no standard sets
them).
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from reval.data.config import Config
from reval.data.dataset import dense_matrix, feature_specs
from reval.data.sales import repeat_sales
from reval.data.store import Store
from reval.errors import UserError
from reval.model.design import typical_value
from reval.plain import Record
from reval.results import CheckNotRun, CheckPage, CheckReport, CheckSegment

# Every check, in the order a person works through them: code -> what it lists. The features a combination
# check reads are named in [check]; NEEDS says which.
CHECKS: dict[str, str] = {
    "missing": "a feature left blank: the model fills in a typical value",
    "beyond_range": "a value outside the range reval.toml declares for the feature (the next import refuses it)",
    "beyond_sold": "a value beyond those of the segment's sold parcels: the segment's sales say nothing about it",
    "area_per_bathroom": "little living area for many bathrooms ([check] min_area_per_bathroom)",
    "no_bathroom": "a building without a bathroom: 0 may stand for unknown",
    "built_after_valuation": "a year built after the valuation date",
    "built_after_sale": "a sale before the building was built: the price was not paid for the parcel as recorded",
    "price_per_area": "a sale price per unit of living area far from the segment's median "
                      "([check] price_per_area_factor)",
    "price_vs_prior": "a sale price far from the prior value ([check] price_to_prior_factor)",
    "duplicate_sale": "two or more sales of one parcel on one day",
    "repeat_sale": "a parcel sold more than once in the sale window (the latest counts; [sales] repeat_sales)",
}
NEEDS: dict[str, tuple[str, ...]] = {
    "area_per_bathroom": ("living_area", "bathrooms"), "no_bathroom": ("living_area", "bathrooms"),
    "built_after_valuation": ("year_built",), "built_after_sale": ("year_built",),
    "price_per_area": ("living_area",),
}
SORTS = ("segment", "code", "parcel", "feature")
BASES = {True: "qualified sales", False: "sales in the sale window"}


@dataclass(frozen=True)
class CheckScope:
    """What one check was run on: the sales its sold ranges come from and the checks that could not run."""

    basis: str
    not_run: tuple[CheckNotRun, ...]


def _roles(config: Config, store: Store) -> tuple[dict[str, int | None], list[CheckNotRun]]:
    """The position of each feature [check] names (None when absent or not continuous) and the checks that
    cannot run without them, with why."""
    specs = {f.name: (i, f.kind) for i, f in enumerate(feature_specs(store))}
    positions: dict[str, int | None] = {}
    why: dict[str, str] = {}
    for role in ("living_area", "bathrooms", "year_built"):
        name = getattr(config.check, role)
        position, kind = specs.get(name, (None, None))
        positions[role] = position if kind == "continuous" else None
        if kind is None:
            why[role] = f"no feature named {name!r} ([check] {role} names the feature to read)"
        elif kind != "continuous":
            why[role] = f"{name!r} is {kind}; [check] {role} needs a continuous feature"
    not_run: list[CheckNotRun] = [{"check": code, "reason": "; ".join(why[r] for r in roles if r in why)}
                                  for code, roles in NEEDS.items() if any(r in why for r in roles)]
    return positions, not_run


def _typical_sold_values(store: Store, n_features: int) -> list[float | None]:
    """Per feature, the typical value among the sold parcels (reval.model.design.typical_value, the rule the
    model fills blanks with), None where no sold parcel has one."""
    X = dense_matrix(store.run("check_sold_values").fetchnumpy()["value"], n_features)
    kinds = [f.kind for f in feature_specs(store)]
    return [typical_value(X[:, j], kinds[j]) if np.isfinite(X[:, j]).any() else None for j in range(n_features)]


def build_check(store: Store, config: Config, segment: str | None = None) -> CheckScope:
    """Fill the temporary table check_rows with every problem found, in one segment or all (reads the database,
    writes nothing). Every check compares a parcel only with its own segment (and typical values with the whole
    jurisdiction), so one segment's rows are the same whether it is checked alone or with the others."""
    prepared = bool(store.rows("check_prepared")[0][0])
    window = {"start": config.sale_window_start, "valuation_date": config.valuation_date}
    store.run("check_table", {"prepared": prepared, **window})
    ranged = [f for f in config.features if f.range is not None]
    n_features = len(feature_specs(store))
    store.run("check_features", {"range_names": [f.name for f in ranged],
                                 "range_lo": [f.range[0] for f in ranged if f.range],
                                 "range_hi": [f.range[1] for f in ranged if f.range],
                                 "fills": _typical_sold_values(store, n_features), "segment": segment})
    positions, not_run = _roles(config, store)
    store.run("check_parcels", {"area": positions["living_area"], "baths": positions["bathrooms"],
                                "year": positions["year_built"], "min_area": config.check.min_area_per_bathroom,
                                "valuation_date": config.valuation_date, "segment": segment})
    repeat_sales(store, config)
    store.run("check_sales", {**window, "prepared": prepared, "area": positions["living_area"],
                              "year": positions["year_built"], "area_factor": config.check.price_per_area_factor,
                              "prior_factor": config.check.price_to_prior_factor, "segment": segment})
    return CheckScope(BASES[prepared], tuple(not_run))


def check_report(store: Store, config: Config, csv_path: Path | None = None) -> CheckReport:
    """The whole check: problems per segment and check, what each check lists, those that could not run, and
    every row written to `csv_path` when given."""
    scope = build_check(store, config)
    segments = segment_counts(store)
    written = None if csv_path is None else {"path": str(csv_path), "rows": write_rows(store, config, csv_path)}
    totals: dict[str, int] = {}
    for s in segments:
        for code, n in s["counts"].items():
            totals[code] = totals.get(code, 0) + n
    return {"valuation_date": config.valuation_date.isoformat(),
            "sale_window": [config.sale_window_start.isoformat(), config.valuation_date.isoformat()],
            "basis": scope.basis, "checks": dict(CHECKS), "segments": segments,
            "totals": {code: totals[code] for code in CHECKS if code in totals}, "not_run": list(scope.not_run),
            "csv": written}


def segment_counts(store: Store) -> list[CheckSegment]:
    """Per segment: parcels, sold parcels and problems per check (of the check built last)."""
    out: list[CheckSegment] = []
    for r in store.records("check_segments"):
        counts = {str(k): int(v) for k, v in r["counts"].items()}
        out.append({"segment": r["segment"], "parcels": r["parcels"], "sold_parcels": r["sold_parcels"],
                    "problems": sum(counts.values()), "counts": counts})
    return out


def rows_page(store: Store, page: int, page_size: int, segment: str | None = None, code: str | None = None,
              sort: str = "segment") -> CheckPage:
    """One page of the rows of the check built last that pass the filters, sorted in SQL; a page past the end
    shows the last one."""
    if sort not in SORTS:
        raise UserError(f"The check's rows sort by {', '.join(SORTS)}, not {sort!r}.")
    if code is not None and code not in CHECKS:
        raise UserError(f"No check named {code!r} (the checks: {', '.join(CHECKS)}).")
    filters = {"segment": segment, "code": code}
    total = int(store.rows("check_total", filters)[0][0])
    pages = max(1, -(-total // page_size))
    page = min(max(page, 0), pages - 1)
    rows: list[Record] = store.records("check_page", {**filters, "sort": sort, "limit": page_size,
                                                      "offset": page * page_size})
    return {"page": page, "pages": pages, "total": total, "segment": segment, "code": code, "sort": sort,
            "rows": rows}


def write_rows(store: Store, config: Config, path: Path) -> int:
    """Write every row of the check built last to `path` as CSV (through a temporary file, then renamed);
    never over one of the project's own files. Returns the number of rows."""
    from reval.roll.export import project_files  # the one list of the files no output may replace

    path = Path(path).resolve()
    if not path.parent.is_dir():
        raise UserError(f"{path.parent}: no such folder")
    if path.is_dir():
        raise UserError(f"{path} is a folder; give the CSV's file name, e.g. {path / 'check.csv'}")
    if path in project_files(config):
        raise UserError(f"{path} is one of the project's own files (config, database or input); choose another "
                        "file name, e.g. check.csv.")
    tmp = path.with_name(f".{path.name}.{os.getpid()}.partial")
    try:
        store.run("csv_cells")
        store.run("check_csv", {"path": str(tmp)})
        os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)
    return int(store.rows("check_total", {"segment": None, "code": None})[0][0])
