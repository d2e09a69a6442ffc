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
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable

import numpy as np

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


@dataclass(frozen=True)
class Role:
    """One mapped column of one file: the role it plays, how its cells are checked (sql/queries/import_problems.sql)
    and `cell`, its place (1-based) in the list of the file's mapped columns that the staging reads."""

    file: str
    col: str
    role: str
    name: str
    kind: str
    position: int | None = None
    levels: list[str] | None = None
    lo: float | None = None
    hi: float | None = None
    log: bool = False
    missing: list[str] | None = None
    cell: int = 0


def _roles(config: Config) -> list[Role]:
    """Every (file, mapped column) with its role (`cell` is set by _numbered, from the files' headers)."""
    roles: list[Role] = []
    files = [(str(config.parcels_file), PARCEL_ROLES), (str(config.sales_source), SALE_ROLES | {"parcel_id": True})]
    for file, names in files:
        for role in names:
            if role in config.columns and not any(r.file == file and r.role == role for r in roles):
                roles.append(Role(file, config.columns[role], role, role, ROLE_KINDS[role]))
    for position, f in enumerate(config.features):
        lo, hi = f.range if f.range else (None, None)
        roles.append(Role(str(config.parcels_file), f.column, "feature", f.name, f.kind, position,
                          list(f.levels) or None, lo, hi, f.log, list(f.missing) or None))
    return roles


def _numbered(roles: list[Role], headers: dict[str, list[str]]) -> list[Role]:
    """Each role with its column's place among its file's mapped columns in file order (DuckDB's COLUMNS(list)
    keeps the file's order)."""
    places = {file: {c: i for i, c in enumerate((c for c in header if any(r.file == file and r.col == c for r in roles)), 1)}
              for file, header in headers.items()}
    return [replace(r, cell=places[r.file][r.col]) for r in roles]


def _columns(roles: list[Role], file: str) -> list[str]:
    """The file's distinct mapped columns in the order of Role.cell."""
    return [col for col, _ in sorted({(r.col, r.cell) for r in roles if r.file == file}, key=lambda pair: pair[1])]


def stage_roles(store: Store, roles: list[Role], keys: dict[str, str], parcels: str, sales: str) -> None:
    """Create the import's temporary tables and describe what is staged: each file (by its key) and its roles.
    `parcels` and `sales` are the files holding them (the same one for a combined file)."""
    store.run("import_temp_tables")
    for file in dict.fromkeys(r.file for r in roles):
        store.run("import_insert_file", [keys.get(file, file), file == parcels, file == sales])
    for r in roles:
        store.run("import_insert_role", [keys.get(r.file, r.file), r.col, r.role, r.name, r.kind, r.position, r.levels,
                                         r.lo, r.hi, r.log, r.missing, r.cell])
    store.run("import_cells")


def _header(store: Store, path: Path) -> list[str]:
    name = "import_header_parquet" if path.suffix.lower() == ".parquet" else "import_header_csv"
    try:
        return [row[0] for row in store.rows(name, [str(path)])]
    except Exception as exc:  # duckdb raises many types for unreadable files
        raise ConfigError(path, "files", f"cannot read the file: {exc}") from None


def _check_columns(config: Config, roles: list[Role], store: Store) -> dict[str, list[str]]:
    """Every mapped column must be in its file (the error names file, key and column); each file's header."""
    headers = {}
    for file in dict.fromkeys(r.file for r in roles):
        header = headers[file] = _header(store, Path(file))
        for r in roles:
            if r.file == file and r.col not in header:
                key = f"columns.{r.role}" if r.role != "feature" else f"features ({r.name}).column"
                raise ConfigError(config.path, key,
                                  f"column '{r.col}' is not in {file} (its columns: {', '.join(sorted(header))})")
    return headers


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


def _file_keys(roles: list[Role]) -> dict[str, str]:
    """A short key for each input file ("f0", "f1"): the staged rows carry it, not the path."""
    return {path: f"f{i}" for i, path in enumerate(dict.fromkeys(r.file for r in roles))}


def _stage(store: Store, config: Config, roles: list[Role], layouts: dict[str, CsvLayout],
           progress: Progress | None) -> None:
    """Read each file once into import_raw (its mapped columns only)."""
    keys = _file_keys(roles)
    stage_roles(store, roles, keys, str(config.parcels_file), str(config.sales_source))
    for i, (file, key) in enumerate(keys.items(), 1):
        if _is_parquet(file):
            store.run("import_stage_parquet", [key, file, _columns(roles, file)])
        else:
            store.run("import_stage_csv", [key, file, _columns(roles, file), layouts[file].spaced])
        lines = layouts[file].lines if file in layouts else None
        if lines is not None:                     # rows after a quoted line break or a blank line
            store.con.register("import_line_map", {"row": np.arange(1, len(lines) + 1), "line": lines})
            store.run("import_fix_lines", {"file": key})
            store.con.unregister("import_line_map")
        if progress:
            progress("reading files", i, len(keys))


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
    roles = _roles(config)
    prints = _fingerprint(config)
    report = config.folder / ERROR_REPORT
    with open_store(config.database, memory_mb=config.memory_mb) as store:
        current = {role: sha for role, _, sha, _ in store.rows("dataset_files")}
        if current == prints:
            return _result(store, config, changed=False, prints=prints)
        layouts = _check_structure(store, config, allow_empty, report)
        roles = _numbered(roles, _check_columns(config, roles, store))
        _stage(store, config, roles, layouts, progress)
        found = store.rows("import_problems", {"today": today, "date_format": config.date_format,
                                               "latest_date": _latest_date(config), "max_amount": config.max_amount})
        if found:
            path_of = {key: path for path, key in _file_keys(roles).items()}
            problems = [DataProblem(path_of[file], int(line), column, value, reason)
                        for file, line, column, value, reason in found]
            _write_report(problems, report)
            raise DataErrors(problems, report)
        store.run("import_build", {"date_format": config.date_format})
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
    return {k: int(v) for k, v in store.records("dataset_counts")[0].items()}


def _result(store: Store, config: Config, changed: bool, prints: dict[str, str]) -> ImportResult:
    c = _counts(store)
    files = {k: v for k, v in prints.items() if k != "mapping"}
    others = list(config.classes.land_schedule + config.classes.not_valued)
    missing = {str(feature): int(n) for feature, n in store.rows("feature_missing_counts", {"classes": others})}
    return ImportResult(changed, c["parcels"], c["sales"], c["segments"], c["market_areas"], files, missing)
