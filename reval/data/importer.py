"""Validated, all-or-nothing import of the parcels and sales files named in reval.toml.

Every row is checked set-based in DuckDB; all problems are reported at once (file, line, column, reason)
and written to `import_errors.csv` beside the database. On any problem the database is untouched.
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
from reval.errors import ConfigError, DataErrors, DataProblem
from reval.data.events import record_event
from reval.data.store import Store, open_store
from reval.results import ImportSummary

ERROR_REPORT = "import_errors.csv"
Progress = Callable[[str, int, int], None]

# How each role's cells are checked (see sql/queries/import_problems.sql).
ROLE_KINDS = {
    "parcel_id": "id", "segment": "label", "market_area": "label", "property_class": "label",
    "prior_value": "amount", "latitude": "latitude", "longitude": "longitude",
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

    def as_dict(self) -> ImportSummary:
        return {"changed": self.changed, "parcels": self.parcels, "sales": self.sales,
                "segments": self.segments, "market_areas": self.market_areas, "files": self.files}


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
                             "lo": None, "hi": None, "log": False})
    for position, f in enumerate(config.features):
        lo, hi = f.range if f.range else (None, None)
        rows.append({"file": str(config.parcels_file), "col": f.column, "role": "feature", "name": f.name,
                     "kind": f.kind, "position": position, "levels": list(f.levels) or None,
                     "lo": lo, "hi": hi, "log": f.log})
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


def _stage(store: Store, config: Config, roles: pd.DataFrame, progress: Progress | None) -> None:
    store.run("import_temp_tables")
    store.con.register("roles_frame", roles)
    store.con.execute("INSERT INTO import_roles SELECT * FROM roles_frame")
    store.con.unregister("roles_frame")
    paths = list(dict.fromkeys(roles["file"]))
    for i, file in enumerate(paths, 1):
        columns = sorted(set(roles.loc[roles["file"] == file, "col"]))
        query = "import_stage_parquet" if file.lower().endswith(".parquet") else "import_stage_csv"
        store.run(query, [file, file, columns])
        if progress:
            progress("reading files", i, len(paths))
    store.run("import_cells", [str(config.parcels_file), str(config.sales_source), config.date_format])


def _write_report(problems: pd.DataFrame, path: Path) -> None:
    """Write the problem list atomically (temporary file, then rename)."""
    tmp = path.with_name(path.name + ".tmp")
    with tmp.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["file", "line", "column", "value", "reason"])
        writer.writerows(problems[["file", "line", "column", "value", "reason"]].itertuples(index=False))
    os.replace(tmp, path)


def run_import(config: Config, progress: Progress | None = None, today: dt.date | None = None) -> ImportResult:
    """Check and load the configured files; all or nothing. Raises DataErrors listing every problem."""
    today = today or dt.date.today()
    roles = _roles_frame(config)
    prints = _fingerprint(config)
    report = config.folder / ERROR_REPORT
    with open_store(config.database) as store:
        _check_columns(config, roles, store)
        current = {role: sha for role, _, sha, _ in store.rows("dataset_files")}
        if current == prints:
            return _result(store, changed=False, prints=prints)
        _stage(store, config, roles, progress)
        problems = store.frame("import_problems", [today, config.date_format])
        if len(problems):
            _write_report(problems, report)
            raise DataErrors([DataProblem(r.file, int(r.line), r.column, r.value, r.reason)
                              for r in problems.itertuples()], report)
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
        return _result(store, changed=True, prints=prints)


def _counts(store: Store) -> dict[str, int]:
    frame = store.frame("dataset_counts")
    return {k: int(v) for k, v in frame.iloc[0].items()}


def _result(store: Store, changed: bool, prints: dict[str, str]) -> ImportResult:
    c = _counts(store)
    files = {k: v for k, v in prints.items() if k != "mapping"}
    return ImportResult(changed, c["parcels"], c["sales"], c["segments"], c["market_areas"], files)
