"""Validated, all-or-nothing import of the parcels and sales files named in reval.toml.

First each CSV file's structure is checked (reval.data.csv_scan: UTF-8, quotes, NUL bytes, unique column
names, as many values on every row as in the header), and a file without data rows is refused unless
allowed; then every cell is checked set-based in DuckDB (numbers finite and, for prices and prior values,
at most [files] max_amount; ISO dates from 1800 to the valuation date plus a year; ...). All problems are
reported at once (file, physical line, column, reason) and written to `import_errors.csv` beside the
database. On any problem the database is untouched. Every cell is trimmed of surrounding white space
(tabs and no-break spaces included), so " 00101" and "<tab>00101" are the parcel 00101 (and a second row
for it is refused as a duplicate) rather than a second parcel.
"""
from __future__ import annotations

import csv
import datetime as dt
import hashlib
import json
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import pandas as pd

from reval.data.config import PARCEL_ROLES, SALE_ROLES, Config
from reval.data.csv_scan import CsvLayout, scan_csv
from reval.data.events import record_event
from reval.data.store import Store, open_store
from reval.errors import ConfigError, DataErrors, DataProblem
from reval.results import ImportSummary

ERROR_REPORT = "import_errors.csv"
Progress = Callable[[str, int, int], None]

# How each role's cells are checked (see sql/queries/import_problems.sql).
ROLE_KINDS = {
    "parcel_id": "id", "segment": "label", "market_area": "label", "property_class": "label",
    "prior_market_value": "amount", "prior_assessed_value": "amount", "new_construction": "binary",
    "latitude": "latitude", "longitude": "longitude",
    "sale_id": "id", "sale_date": "date", "sale_price": "price", "sale_validity": "code",
}


@dataclass(frozen=True)
class ImportResult:
    """What an import did: whether anything changed and the new data set's counts."""

    changed: bool
    parcels: int
    sales: int
    segments: int
    market_areas: int
    files: dict[str, str]
    missing: dict[str, int]      # parcels the model values lacking each feature: the model fills them in (flagged)

    def as_dict(self) -> ImportSummary:
        return {"changed": self.changed, "parcels": self.parcels, "sales": self.sales,
                "segments": self.segments, "market_areas": self.market_areas, "files": self.files,
                "filled_in": self.missing}


def sha256_file(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _roles_frame(config: Config) -> pd.DataFrame:
    """One row per (file, mapped column): the role it plays and how to check it."""
    rows: list[dict[str, object]] = []
    files = [(str(config.parcels_file), PARCEL_ROLES), (str(config.sales_source), SALE_ROLES | {"parcel_id": True})]
    for file, roles in files:
        for role in roles:
            if role in config.columns and not any(r["file"] == file and r["role"] == role for r in rows):
                rows.append({"file": file, "col": config.columns[role], "role": role, "name": role,
                             "kind": ROLE_KINDS[role], "position": None, "levels": None,
                             "lo": None, "hi": None, "log": False, "missing": None})
    for position, f in enumerate(config.features):
        lo, hi = f.range if f.range else (None, None)
        rows.append({"file": str(config.parcels_file), "col": f.column, "role": "feature", "name": f.name,
                     "kind": f.kind, "position": position, "levels": list(f.levels) or None,
                     "lo": lo, "hi": hi, "log": f.log, "missing": list(f.missing) or None})
    frame = pd.DataFrame(rows)
    frame["position"] = frame["position"].astype("Int16")
    return frame


def _header(store: Store, path: Path) -> list[str]:
    name = "import_header_parquet" if path.suffix.lower() == ".parquet" else "import_header_csv"
    try:
        return [row[0] for row in store.rows(name, [str(path)])]
    except Exception as exc:  # duckdb raises many types for unreadable files
        raise ConfigError(path, "files", f"cannot read the file: {exc}") from None


def _check_columns(config: Config, roles: pd.DataFrame, store: Store) -> None:
    """Every mapped column must be in its file; the error names file, key and column."""
    for file, group in roles.groupby("file", sort=False):
        present = set(_header(store, Path(file)))
        for row in group.itertuples():
            if row.col not in present:
                key = f"columns.{row.role}" if row.role != "feature" else f"features ({row.name}).column"
                raise ConfigError(config.path, key,
                                  f"column '{row.col}' is not in {file} (its columns: {', '.join(sorted(present))})")


def _mapping_hash(config: Config) -> str:
    """Hash of everything in the config that shapes the imported data."""
    payload = {"columns": dict(config.columns), "date_format": config.date_format,
               "features": [f.__dict__ for f in config.features]}
    return hashlib.sha256(json.dumps(payload, sort_keys=True, default=str).encode()).hexdigest()


def _fingerprint(config: Config) -> dict[str, str]:
    prints = {"parcels": sha256_file(config.parcels_file), "mapping": _mapping_hash(config)}
    if config.sales_file is not None:
        prints["sales"] = sha256_file(config.sales_file)
    return prints


def _is_parquet(path: Path | str) -> bool:
    return str(path).lower().endswith(".parquet")


def _check_structure(store: Store, config: Config, allow_empty: bool, report: Path) -> dict[str, CsvLayout]:
    """Each input file's structure (CSV) and data rows; raises DataErrors listing every problem."""
    layouts: dict[str, CsvLayout] = {}
    problems: list[DataProblem] = []
    for path in dict.fromkeys(p for p in (config.parcels_file, config.sales_file) if p is not None):
        if _is_parquet(path):
            rows = int(store.rows("import_row_count_parquet", [str(path)])[0][0])
        else:
            layout = layouts[str(path)] = scan_csv(path)
            problems += layout.problems
            rows = -1 if layout.problems else layout.rows
        if rows == 0 and not allow_empty:
            problems.append(DataProblem(str(path), 2, "(line)", None, "no data rows after the header: importing it "
                                        "would empty the data set; give --allow-empty if that is meant"))
    if problems:
        _write_report(problems, report)
        raise DataErrors(problems, report)
    return layouts


def _file_keys(roles: pd.DataFrame) -> dict[str, str]:
    """A short key for each input file ("f0", "f1"): the staged cells carry it, not the path, which held on
    each of millions of cells costs more memory than the cell (DuckDB inlines strings of up to 12 bytes)."""
    return {path: f"f{i}" for i, path in enumerate(dict.fromkeys(roles["file"]))}


def _stage(store: Store, config: Config, roles: pd.DataFrame, layouts: dict[str, CsvLayout],
           progress: Progress | None) -> None:
    keys = _file_keys(roles)
    store.run("import_temp_tables")
    store.con.register("roles_frame", roles.assign(file=roles["file"].map(keys)))
    store.con.execute("INSERT INTO import_roles SELECT * FROM roles_frame")
    store.con.unregister("roles_frame")
    for i, (file, key) in enumerate(keys.items(), 1):
        columns = sorted(set(roles.loc[roles["file"] == file, "col"]))
        store.run("import_stage_parquet" if _is_parquet(file) else "import_stage_csv", [key, file, columns])
        lines = layouts[file].lines if file in layouts else None
        if lines is not None:                     # rows after a quoted line break or a blank line
            store.con.register("import_line_map", pd.DataFrame({"row": range(1, len(lines) + 1), "line": lines}))
            store.run("import_fix_lines", {"file": key})
            store.con.unregister("import_line_map")
        if progress:
            progress("reading files", i, len(keys))
    store.run("import_cells", [keys[str(config.parcels_file)], keys[str(config.sales_source)], config.date_format])


def _write_report(problems: list[DataProblem], path: Path) -> None:
    """Write the problem list atomically (temporary file, then rename)."""
    tmp = path.with_name(path.name + ".tmp")
    with tmp.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["file", "line", "column", "value", "reason"])
        writer.writerows((p.file, p.line, p.column, p.value, p.reason) for p in problems)
    os.replace(tmp, path)


def _latest_date(config: Config) -> dt.date:
    """The last sale date an import accepts: the valuation date plus a year."""
    date = config.valuation_date
    return date.replace(year=date.year + 1, day=28 if (date.month, date.day) == (2, 29) else date.day)


def run_import(config: Config, progress: Progress | None = None, today: dt.date | None = None,
               allow_empty: bool = False) -> ImportResult:
    """Check and load the configured files; all or nothing. Raises DataErrors listing every problem; a file
    without data rows is a problem unless `allow_empty`. Holds the project's writer lock (reval.data.store)."""
    today = today or dt.date.today()
    roles = _roles_frame(config)
    prints = _fingerprint(config)
    report = config.folder / ERROR_REPORT
    with open_store(config.database, memory_mb=config.memory_mb) as store:
        current = {role: sha for role, _, sha, _ in store.rows("dataset_files")}
        if current == prints:
            return _result(store, config, changed=False, prints=prints)
        layouts = _check_structure(store, config, allow_empty, report)
        _check_columns(config, roles, store)
        _stage(store, config, roles, layouts, progress)
        found = store.frame("import_problems", {"today": today, "date_format": config.date_format,
                                                "latest_date": _latest_date(config), "max_amount": config.max_amount})
        if len(found):
            path_of = {key: path for path, key in _file_keys(roles).items()}
            problems = [DataProblem(path_of[r.file], int(r.line), r.column, r.value, r.reason)
                        for r in found.itertuples()]
            _write_report(problems, report)
            raise DataErrors(problems, report)
        store.run("import_build")
        with store.transaction() as con:
            store.run("import_replace")
            counts = _counts(store)
            for role, sha in prints.items():
                path = {"parcels": config.parcels_file, "sales": config.sales_file}.get(role)
                n_rows = counts["parcels"] if role == "parcels" else counts["sales"] if role == "sales" else 0
                store.run("insert_dataset_file", [role, str(path or config.path), sha, n_rows])
            record_event(con, "import", {"files": {k: v for k, v in prints.items() if k != "mapping"},
                                         "counts": counts, "config_sha256": config.sha256})
        if report.exists():
            report.unlink()
        return _result(store, config, changed=True, prints=prints)


def _counts(store: Store) -> dict[str, int]:
    frame = store.frame("dataset_counts")
    return {k: int(v) for k, v in frame.iloc[0].items()}


def _result(store: Store, config: Config, changed: bool, prints: dict[str, str]) -> ImportResult:
    c = _counts(store)
    files = {k: v for k, v in prints.items() if k != "mapping"}
    others = list(config.classes.land_schedule + config.classes.not_valued)
    missing = {str(feature): int(n) for feature, n in store.rows("feature_missing_counts", {"classes": others})}
    return ImportResult(changed, c["parcels"], c["sales"], c["segments"], c["market_areas"], files, missing)
