"""Export of the certified value roll: a CSV written by DuckDB and its manifest, published as a pair.

The manifest holds the row count, totals per segment, the sha256 of the CSV, run ids, config hash, who and
when; it is strict JSON. Both files are written to hidden temporary files in the target's folder and
fsync'd; the transaction that marks the batches exported and records the events also commits the
publication, and only then are the files renamed, the manifest first and the roll last (an overwritten
roll is removed before its manifest is replaced). A reader therefore never finds a roll beside a manifest
that is not its own, and a crash at any moment leaves either no export (the batches still approved, no
event, temporary files that the next writing command removes) or a recorded export whose files the next
writing command puts in place, saying so (reval.data.publish).

Text cells that a spreadsheet would read as a formula (starting with = + - @, a tab or a carriage return)
get a leading single quote, and so does a cell that already starts with one; removing one leading quote
from any text cell that starts with one gives back the stored text exactly (OWASP "CSV Injection", from
memory, recommends the quote; quoting the quote too keeps ids such as =1+1 and '=1+1 apart).
"""
from __future__ import annotations

import hashlib
import json
import logging
import os
from pathlib import Path
from typing import Any

from reval.clock import utc_now
from reval.data import publish
from reval.data.config import Config
from reval.data.events import current_user, record_event
from reval.data.importer import ERROR_REPORT
from reval.data.lock import lock_path
from reval.data.store import Store
from reval.errors import UserError
from reval.results import ExportResult, Manifest, PendingBatch
from reval.roll.batch_states import outdated, segment_states
from reval.roll.land import schedule_path
from reval.roll.valuation import refuse_bad_values

log = logging.getLogger("reval")
PARTIAL_SUFFIX = ".partial"
CHUNK = 1 << 20
TEXT_CELLS = ("a text cell starting with = + - @ ' a tab or a carriage return was written with one more leading "
              "single quote: remove one leading ' from a text cell that starts with one to read the stored text")


def manifest_path(path: Path) -> Path:
    """Where the manifest of a roll file goes: roll.csv -> roll.manifest.json."""
    return path.with_name(path.stem + ".manifest.json")


def _partial(path: Path) -> Path:
    return path.with_name(f".{path.name}.{os.getpid()}{PARTIAL_SUFFIX}")


def _fsync(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        while block := handle.read(CHUNK):
            digest.update(block)
    return digest.hexdigest()


def _plan(store: Store, partial: bool) -> tuple[list[dict[str, Any]], list[str], list[PendingBatch]]:
    """The certified batches to export, the segments without one, and the open newer batches left out."""
    states = segment_states(store)
    missing = [s["segment"] for s in states if s["certified"] is None]
    if missing and not partial:
        shown = ", ".join(missing[:30]) + (f" and {len(missing) - 30} more" if len(missing) > 30 else "")
        raise UserError(f"Export refused: {len(missing)} segment(s) not approved: {shown}. Approve them, or "
                        "export the approved segments alone with --partial.")
    certified = [s["certified"] for s in states if s["certified"] is not None]
    if not certified:
        raise UserError("Nothing to export: no segment is approved.")
    stale = [str(b["segment"]) for b in certified if outdated(b)]
    if stale:
        log.warning("the certified values of %s predate a later correction or override, which is not in this roll "
                    "until the segment is valued and approved again", ", ".join(stale))
    pending: list[PendingBatch] = [
        {"segment": s["segment"], "batch_id": int(s["open"]["batch_id"]), "run_id": str(s["open"]["run_id"]),
         "state": s["open"]["state"]} for s in states if s["certified"] is not None and s["open"] is not None]
    return certified, missing, pending


def project_files(config: Config) -> set[Path]:
    """Files an export must never write over: the config, the database and its log, the inputs."""
    database = config.database.resolve()
    owned = {config.path, database, database.with_name(database.name + ".wal"), lock_path(database),
             config.parcels_file, config.folder / ERROR_REPORT}
    owned |= {p for p in (config.sales_file, schedule_path(config)) if p is not None}
    return {p.resolve() for p in owned}


def check_target(config: Config, path: Path, overwrite: bool) -> None:
    """Refuse a roll (or its manifest) that would land on a file of the project, or on any existing file
    unless `overwrite` is given."""
    if not path.parent.is_dir():
        raise UserError(f"{path.parent}: no such folder")
    if path.is_dir():
        raise UserError(f"{path} is a folder; give the roll's file name, e.g. {path / 'roll.csv'}")
    owned = project_files(config)
    for target in (path, manifest_path(path)):
        if target.resolve() in owned:
            raise UserError(f"Export refused: {target} is one of the project's own files (config, database or "
                            "input); choose another file name, e.g. value_roll.csv.")
        if target.exists() and not overwrite:
            raise UserError(f"Export refused: {target} already exists; choose another file name or give "
                            "--overwrite to replace it.")


def export_roll(store: Store, config: Config, path: Path, partial: bool = False,
                overwrite: bool = False) -> ExportResult:
    """Write the roll of every certified batch to `path` with its manifest and mark approved batches exported,
    as one recoverable publication. Never writes over the project's own files, nor over an existing file
    unless `overwrite`; refuses values that are not finite and positive."""
    path = Path(path).resolve()
    check_target(config, path, overwrite)
    certified, missing, pending = _plan(store, partial)
    ids = [int(b["batch_id"]) for b in certified]
    refuse_bad_values(store, ids, "Export")
    tmp, tmp_manifest = _partial(path), _partial(manifest_path(path))
    publication = publish.begin(store, path, tmp, manifest_path(path), tmp_manifest, overwrite)
    try:
        manifest = _write_files(store, config, path, tmp, tmp_manifest, ids, missing, pending)
        _mark_exported(store, certified, manifest, path, publication)
    except BaseException:
        publish.abandon(store, publication)
        raise
    publish.finish(store, publication)
    return {**manifest, "path": str(path), "manifest": str(manifest_path(path))}


def _write_files(store: Store, config: Config, path: Path, tmp: Path, tmp_manifest: Path, ids: list[int],
                 missing: list[str], pending: list[PendingBatch]) -> Manifest:
    """The roll and its manifest in their temporary files, fsync'd; returns the manifest."""
    store.run("csv_cells")
    store.run("export_roll_csv", {"path": str(tmp), "batch_ids": ids})
    _fsync(tmp)
    totals = store.records("export_totals", {"batch_ids": ids})
    manifest: Manifest = {
        "file": path.name, "rows": sum(t["rows"] for t in totals), "sha256": _sha256(tmp),
        "segments": totals, "run_ids": sorted({t["run_id"] for t in totals}),
        "partial": bool(missing), "not_approved": missing,
        "pending_newer_batches": [p["segment"] for p in pending], "pending_batches": pending,
        "config_sha256": config.sha256, "who": current_user(),
        "when": utc_now().isoformat(timespec="seconds") + "Z", "text_cells": TEXT_CELLS,
    }
    tmp_manifest.write_text(json.dumps(manifest, indent=2, sort_keys=True, allow_nan=False), encoding="utf-8")
    _fsync(tmp_manifest)
    return manifest


def _mark_exported(store: Store, certified: list[dict[str, Any]], manifest: Manifest, path: Path,
                   publication: int) -> None:
    """Approved batches become exported, every export is an event, and the publication of the files is
    committed with them: one transaction."""
    at = utc_now()
    fresh = [b for b in certified if b["state"] == "approved"]
    with store.transaction() as con:
        if [b["batch_id"] for b in store.records("batch_certified")] != [b["batch_id"] for b in certified]:
            raise UserError("Batches changed while exporting; nothing was exported: export again.")
        store.run("batch_set_state", {"batch_ids": [b["batch_id"] for b in fresh], "state": "exported",
                                      "at": at, "note": None})
        for b in fresh:
            record_event(con, "batch_exported", {"batch_id": b["batch_id"], "from": "approved", "to": "exported",
                                                 "file": str(path), "sha256": manifest["sha256"]},
                         segment=b["segment"], run_id=b["run_id"])
        record_event(con, "roll_exported", {"file": str(path), **{k: manifest[k] for k in (
            "rows", "sha256", "run_ids", "partial", "not_approved", "config_sha256")},
            "batch_ids": [b["batch_id"] for b in certified]})
        publish.commit(store, publication)
