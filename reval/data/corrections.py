"""Data corrections without a refit: one parcel's characteristics changed in the database and the parcel
revalued with the run's stored models (reval/model/stored.py).

The corrected cells are checked by the import's own checks (sql/queries/import_problems.sql: numbers, levels,
declared ranges, yes/no values), so a correction accepts exactly what an import would; nothing changes on a
failed check. Only that parcel's feature values, its estimate and its contributions in the run change; every
other parcel, the curves and the run's sales are untouched: a refit stays a deliberate act. The correction is an
event (old and new values, old and new estimate) and marks the segment's batches outdated
(reval/roll/batch_states.py), so its values are staged and decided again. A re-import of changed files replaces
the imported data, corrections included: correct the source too.
"""
from __future__ import annotations

import datetime as dt
from typing import Any

import numpy as np
import pandas as pd

from reval.data.config import Config
from reval.data.dataset import dense_matrix
from reval.data.events import record_event
from reval.data.store import Store
from reval.errors import UserError
from reval.model import stored
from reval.data.fingerprint import record_fingerprints
from reval.data.importer import Role, stage_roles
from reval.model.run import value_parcels
from reval.results import CorrectionResult
from reval.roll.batch_states import mark_outdated
from reval.roll.overrides import parcel_segment
from reval.roll.valuation import resolve_run

SOURCE = "reval correct"   # the file name the import's checks see


def _parse(changes: list[str], features: dict[str, dict[str, Any]]) -> dict[str, str]:
    """`feature=value` arguments as {feature: text}; unknown or repeated features refused by name."""
    parsed: dict[str, str] = {}
    for item in changes:
        name, sep, value = item.partition("=")
        name = name.strip()
        if not sep or not name:
            raise UserError(f"Write each correction as FEATURE=VALUE, not {item!r}. Nothing was changed.")
        if name not in features:
            raise UserError(f"Unknown feature {name!r} (the imported features: {', '.join(features)}). "
                            "Nothing was changed.")
        if name in parsed:
            raise UserError(f"Feature {name!r} is corrected twice. Nothing was changed.")
        parsed[name] = value
    return parsed


def _checked(store: Store, config: Config, parcel_id: str, parsed: dict[str, str],
             features: dict[str, dict[str, Any]]) -> pd.DataFrame:
    """The corrected values as stored codes (position, value), checked by the import's checks (a value the
    config declares to mean "missing" is stored as missing, as on import)."""
    missing = {f.name: list(f.missing) or None for f in config.features}
    roles = [Role(SOURCE, "(parcel)", "parcel_id", "parcel_id", "id", cell=1)]
    roles += [Role(SOURCE, name, "feature", name, f["kind"], f["position"], f["levels"], f["range_lo"], f["range_hi"],
                   f["log"], missing.get(name), cell) for cell, (name, f) in enumerate(
                       ((n, f) for n, f in features.items() if n in parsed), 2)]
    stage_roles(store, roles, {}, parcels=SOURCE, sales="")
    cells = [parcel_id, *(parsed[r.name] for r in roles[1:])]
    store.run("correct_stage_cells", {"file": SOURCE, "cells": cells})
    problems = store.records("import_problems", {"today": dt.date.today(), "date_format": None,
                                                 "latest_date": config.valuation_date,
                                                 "max_amount": config.max_amount})
    if problems:
        listed = "; ".join(f"{p['column']} = {p['value']!r}: {p['reason']}" for p in problems)
        raise UserError(f"Correction of parcel {parcel_id} refused: {listed}. Nothing was changed.")
    store.run("import_build", {"date_format": None})
    return store.frame("import_new_feature_values")


def _model(store: Store, run_id: str, names: list[str]) -> Any:
    rows = store.rows("run_model", [run_id])
    if not rows:
        raise UserError(f"Run {run_id} keeps no model to revalue one parcel with (it was made before runs kept "
                        "their models): run `reval fit` once, then correct. Nothing was changed.")
    try:
        model = stored.decode(str(rows[0][0]), bytes(rows[0][1]))
    except ValueError as exc:
        raise UserError(f"Run {run_id}: {exc}; run `reval fit` again. Nothing was changed.") from None
    if [f.name for f in model.features] != names:
        raise UserError(f"Run {run_id} was fitted on other features than those imported now: run `reval fit`. "
                        "Nothing was changed.")
    return model


def _shown(feature: dict[str, Any], value: float | None) -> Any:
    """A stored value as the parcels file writes it: levels by name, yes/no, numbers as numbers."""
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return None
    if feature["kind"] in ("ordinal", "categorical"):
        return feature["levels"][int(value)]
    if feature["kind"] == "binary":
        return "yes" if value == 1 else "no"
    return value


def correct_parcel(store: Store, config: Config, parcel_id: str, changes: list[str], note: str,
                   run_id: str | None = None) -> CorrectionResult:
    """Correct one parcel's features and revalue it with the run's stored model (default: the newest run), in one
    transaction with its event; the segment's batches become outdated."""
    parcel_id, text = parcel_id.strip(), (note or "").strip()
    if not text:
        raise UserError("Give the reason for the correction with --note; it is kept in the audit log. "
                        "Nothing was changed.")
    segment = parcel_segment(store, parcel_id)
    features = {r["name"]: r for r in store.records("feature_list")}
    parsed = _parse(changes, features)
    if not parsed:
        raise UserError("Name at least one correction as FEATURE=VALUE. Nothing was changed.")
    run = resolve_run(store, run_id)
    model = _model(store, run, list(features))
    before = store.records("app_parcel_estimate", [run, parcel_id])
    if not before:
        raise UserError(f"Run {run} has no value for parcel {parcel_id}: it was fitted on another data set; run "
                        "`reval fit`. Nothing was changed.")
    new_codes = _checked(store, config, parcel_id, parsed, features)
    old = {r["name"]: r["value"] for r in store.records("app_parcel_features", [parcel_id])}
    by_position = {int(p): v for p, v in zip(new_codes["position"], new_codes["value"])}
    codes = {name: by_position.get(int(f["position"]), old[name]) for name, f in features.items()}
    X = dense_matrix(np.array([np.nan if v is None else v for v in codes.values()], dtype=float), len(features))
    parcel = pd.DataFrame(store.records("app_parcel", [parcel_id]))[["parcel_id", "segment", "market_area"]]
    # Contributions are measured from the segment's reference parcel the run stored (reval.model.reference).
    stored = {r["feature"]: r["value"] for r in store.records("app_segment_reference", [run, segment])}
    reference = np.array([[np.nan if stored.get(name) is None else stored[name] for name in features]], dtype=float)
    estimates, parts = value_parcels(model, parcel, X, reference)
    changed = [{"feature": name, "old": _shown(features[name], old[name]), "new": _shown(features[name], codes[name])}
               for name in parsed]
    old_value, new_value = float(before[0]["market_value"]), float(estimates["market_value"].iloc[0])
    sales_in_fit = int(store.rows("parcel_sales_in_fit", [run, parcel_id])[0][0])
    frames = {"correct_estimate": estimates[["log_value", "market_value"]],
              "correct_parts": parts[["term", "contribution"]]}
    for name, frame in frames.items():
        store.con.register(name, frame)
    try:
        with store.transaction() as con:
            store.run("correct_feature_values", {"parcel": parcel_id})
            store.run("correct_estimate", {"run": run, "parcel": parcel_id})
            record_fingerprints(store, run, [parcel_id])   # the run now holds this parcel's corrected data
            outdated = mark_outdated(store, segment)
            record_event(con, "parcel_corrected", {"parcel_id": parcel_id, "note": text, "changes": changed,
                                                   "old_value": old_value, "new_value": new_value,
                                                   "sales_in_fit": sales_in_fit,
                                                   "outdated_batches": [b["batch_id"] for b in outdated]},
                         segment=segment, run_id=run)
    finally:
        for name in frames:
            store.con.unregister(name)
    return {"parcel_id": parcel_id, "segment": segment, "run_id": run, "changes": changed, "old_value": old_value,
            "new_value": new_value, "note": text, "sales_in_fit": sales_in_fit, "outdated": outdated}
