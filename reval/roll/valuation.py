"""Values for every parcel from a model run, staged as one batch per segment (set-based, in DuckDB).

market value = the run's estimate, rounded to the nearest `assessment.rounding`;
assessed value = market value x `assessment.level`, rounded, then capped: a `[[assessment.caps]]` rule
keeps the assessed value of its property classes within prior assessed value x (1 + max_increase), rounded
down, and x (1 - max_decrease), rounded up; a class takes the first rule naming it, else the first naming no
class; a rule may leave new construction or parcels sold since the prior roll uncapped (flagged
"cap:lifted_..." when the cap would have bound). Caps never read the prior market value;
land value from the land schedule (reval.land), never above the total; improvement = total - land; the
assessed value is split into land and improvement in the same proportion, in whole units that add up.
A property class the model does not value (`[classes]`) takes its land value alone, or no value.
Every rule that changed or withheld a value leaves a flag on the parcel (e.g. "cap:max_increase_10%"), and so
does every value a reviewer would question (reval/roll/flags.py).
No value that is not finite, or not positive, is ever staged or exported (`refuse_bad_values`).

Staging is per segment: the named segments, by default those without a standing decision (a held batch
or an approved one). A decision is never set aside without `replace`: a held batch is then replaced, an
approved batch stays certified until the new batch is decided (reval/roll/batch_states.py).
"""
from __future__ import annotations

import hashlib
from typing import Any, Mapping

import duckdb
import pandas as pd

from reval.clock import utc_now
from reval.data.config import Config
from reval.errors import UserError
from reval.data.events import record_event
from reval.data.fingerprint import refuse_changed_data
from reval.roll.batch_states import SegmentBatches, segment_states, standing_decision
from reval.roll.flags import class_rules, flag_values
from reval.roll.land import LandSchedule, load_land_schedule
from reval.data.store import Store
from reval.results import StagePlan, StageResult, StagedBatch, StandingDecision


def resolve_run(store: Store, run_id: str | None) -> str:
    """The given run (checked to exist) or the newest one."""
    if run_id is None:
        rows = store.rows("roll_latest_run")
        if not rows:
            raise UserError("No model run yet: run `reval fit` first.")
        return str(rows[0][0])
    if store.rows("roll_run_exists", [run_id])[0][0] == 0:
        raise UserError(f"No run '{run_id}'.")
    return run_id


def refuse_bad_values(store: Store, batch_ids: list[int], step: str) -> None:
    """Refuse a step (staging, export) whose batches hold a value that cannot go on a roll: market and assessed
    values must be finite and positive, prior, land and improvement values finite and not negative; the
    message names the parcels. A row without a value (a class left for a manual value) is not refused here: it
    blocks its segment's approval (reval/roll/flags.py)."""
    rows = store.records("roll_bad_values", {"batch_ids": batch_ids})
    if not rows:
        return
    listed = "; ".join(f"parcel {r['parcel_id']} ({r['segment']}): {r['problem']}" for r in rows)
    more = f" and {rows[0]['n'] - len(rows):,} more" if rows[0]["n"] > len(rows) else ""
    raise UserError(f"{step} refused: {rows[0]['n']:,} parcel(s) have values that cannot go on a roll (values must be "
                    f"finite and positive): {listed}{more}. Nothing was changed.")


def cap_table(config: Config, classes: list[str]) -> pd.DataFrame:
    """Each property class's cap rule (the first naming it, else the first naming no class; classes without a
    rule left out): property_class, max_increase, max_decrease (NaN = no limit), exclude_new_construction,
    reset_on_sale, and the flag each limit leaves."""
    chosen: dict[str, Mapping[str, Any]] = {}
    for cap in config.assessment.caps:
        named = cap.get("property_classes")
        for cls in [c for c in named if c in classes] if named is not None else []:
            chosen.setdefault(cls, cap)
    for cap in config.assessment.caps:
        if cap.get("property_classes") is None:
            for cls in classes:
                chosen.setdefault(cls, cap)
    rows = [{"property_class": cls, "max_increase": cap.get("max_increase"), "max_decrease": cap.get("max_decrease"),
             "exclude_new_construction": bool(cap.get("exclude_new_construction", False)),
             "reset_on_sale": bool(cap.get("reset_on_sale", False)),
             "increase_label": _label("max_increase", cap.get("max_increase")),
             "decrease_label": _label("max_decrease", cap.get("max_decrease"))} for cls, cap in chosen.items()]
    columns = {"property_class": str, "max_increase": float, "max_decrease": float, "exclude_new_construction": bool,
               "reset_on_sale": bool, "increase_label": object, "decrease_label": object}
    return pd.DataFrame({k: pd.Series([r[k] for r in rows], dtype=t) for k, t in columns.items()})


def _label(limit: str, value: float | None) -> str | None:
    return None if value is None else f"cap:{limit}_{value * 100:g}%"


def _basis(store: Store, config: Config, schedule: LandSchedule | None) -> str:
    """Fingerprint of what the values depend on besides the run: the config, the land schedule and the imported
    files (a re-import that changes only prior values, which caps read, still gives new batches)."""
    files = ",".join(str(r[2]) for r in store.rows("dataset_files"))
    return hashlib.sha256(f"{config.sha256}:{schedule.sha256 if schedule else '-'}:{files}".encode()).hexdigest()


def _lot_position(store: Store, schedule: LandSchedule | None) -> int | None:
    if schedule is None:
        return None
    rows = store.rows("roll_feature_position", [schedule.lot_feature])
    if not rows:
        raise UserError(f"The land schedule reads feature '{schedule.lot_feature}', which the imported data does "
                        "not hold as a continuous feature: run `reval import` again.")
    return int(rows[0][0])


def _standing(entry: SegmentBatches) -> StandingDecision | None:
    batch = standing_decision(entry)
    if batch is None:
        return None
    fate = ("the held batch is replaced" if batch["state"] == "held"
            else "the approval stays in force until the new batch is decided")
    return {"segment": entry["segment"], "batch_id": int(batch["batch_id"]), "run_id": str(batch["run_id"]),
            "state": batch["state"], "note": batch["note"], "on_restage": fate}


def _choose(store: Store, segments: list[str] | None, replace: bool) -> tuple[list[str], list[StandingDecision],
                                                                          list[StandingDecision]]:
    """Segments to stage, standing decisions kept, and standing decisions a re-stage sets aside (`replace`)."""
    states = segment_states(store)
    if segments is not None:
        known = {e["segment"] for e in states}
        unknown = [s for s in segments if s not in known]
        if unknown:
            raise UserError(f"No segment named {', '.join(repr(s) for s in unknown)}.")
        states = [e for e in states if e["segment"] in segments]
    decided = [(e["segment"], d) for e in states if (d := _standing(e)) is not None]
    if replace:
        return [e["segment"] for e in states], [], [d for _, d in decided]
    if segments is not None and decided:
        shown = "; ".join(f"{s} is {d['state']} (batch {d['batch_id']}, run {d['run_id']})" for s, d in decided)
        fates = "; ".join(sorted({d["on_restage"] for _, d in decided}))
        raise UserError(f"Not staged: {shown}. Give --replace to stage them anyway ({fates}).")
    held = {s for s, _ in decided}
    return [e["segment"] for e in states if e["segment"] not in held], [d for _, d in decided], []


def plan_staging(store: Store, config: Config, run_id: str | None = None, segments: list[str] | None = None,
                 replace: bool = False) -> StagePlan:
    """What `stage_values` would do, without doing it: what the app's confirmation lists."""
    run = resolve_run(store, run_id)
    refuse_changed_data(store, run)
    chosen, kept, set_aside = _choose(store, segments, replace)
    basis = _basis(store, config, load_land_schedule(config, [r[0] for r in store.rows("roll_segments")]))
    fresh = {r[0] for r in store.rows("roll_segments_to_stage", {"run": run, "basis": basis, "segments": chosen})}
    return {"run_id": run, "stage": [s for s in chosen if s in fresh], "unchanged": [s for s in chosen if s not in fresh],
            "kept": kept, "set_aside": [d for d in set_aside if d["segment"] in fresh]}


def stage_values(store: Store, config: Config, run_id: str | None = None, segments: list[str] | None = None,
                 replace: bool = False) -> StageResult:
    """Value every parcel of the chosen segments from a run and stage one batch per segment, replacing the
    segment's open batch; a held or approved batch only with `replace`; exported batches are never touched.
    One transaction."""
    run = resolve_run(store, run_id)
    refuse_changed_data(store, run)
    every = [r[0] for r in store.rows("roll_segments")]
    schedule = load_land_schedule(config, every)
    basis = _basis(store, config, schedule)
    classes = [r[0] for r in store.rows("roll_property_classes")]
    caps = cap_table(config, classes)
    lot_position = _lot_position(store, schedule)
    land_rows = schedule.rows if schedule else pd.DataFrame(
        {"segment": pd.Series(dtype=str), "base_lot_size": pd.Series(dtype=float),
         "base_land_value": pd.Series(dtype=float), "size_exponent": pd.Series(dtype=float)})
    at = utc_now()
    frames = {"roll_land_schedule": land_rows, "roll_caps": caps, "roll_classes": class_rules(config, classes)}
    for name, frame in frames.items():
        store.con.register(name, frame)
    try:
        with store.transaction() as con:
            chosen, kept, _ = _choose(store, segments, replace)
            to_stage = store.frame("roll_segments_to_stage", {"run": run, "basis": basis, "segments": chosen})
            store.con.register("roll_stage_segments", to_stage)
            frames["roll_stage_segments"] = to_stage
            replaced = store.frame("roll_open_batches")
            store.run("batch_set_state", {"batch_ids": replaced["batch_id"].tolist(), "state": "replaced",
                                          "at": at, "note": None})
            store.run("roll_delete_values", {"batch_ids": replaced["batch_id"].tolist()})
            staged = store.frame("roll_insert_batches", {"run": run, "basis": basis, "at": at})
            new_ids = staged["batch_id"].tolist()
            store.run("roll_insert_values", {"run": run, "batch_ids": new_ids, "level": config.assessment.level,
                                             "rounding": config.assessment.rounding,
                                             "prior_roll_date": config.assessment.prior_roll_date,
                                             "allocate": schedule is not None, "lot_position": lot_position})
            flag_values(store, config, run, new_ids)
            refuse_bad_values(store, new_ids, "Staging")
            _record_staging(con, run, basis, staged, replaced)
            flags = dict(store.rows("roll_flag_counts", {"batch_ids": new_ids}))
    finally:
        for name in frames:
            store.con.unregister(name)
    unchanged = sorted(set(chosen) - set(to_stage["segment"]))  # the run covers every segment (checked)
    return {"run_id": run, "staged": _staged_rows(staged, replaced), "unchanged": unchanged, "kept": kept,
            "land_schedule": None if schedule is None else {"lot_feature": schedule.lot_feature,
                                                            "sha256": schedule.sha256},
            "flags": {str(k): int(v) for k, v in flags.items()}}


def _staged_rows(staged: pd.DataFrame, replaced: pd.DataFrame) -> list[StagedBatch]:
    before: Mapping[str, Any] = {r.segment: r for r in replaced.itertuples()}
    return [{"segment": str(r.segment), "batch_id": int(r.batch_id), "n_parcels": int(r.n_parcels),
             "replaced_batch_id": int(before[r.segment].batch_id) if r.segment in before else None,
             "replaced_state": str(before[r.segment].state) if r.segment in before else None}
            for r in staged.itertuples()]


def _record_staging(con: duckdb.DuckDBPyConnection, run: str, basis: str, staged: pd.DataFrame, replaced: pd.DataFrame) -> None:
    """One event per transition: each replaced open batch, each new staged batch."""
    for r in replaced.itertuples():
        record_event(con, "batch_replaced", {"batch_id": int(r.batch_id), "from": r.state, "to": "replaced",
                                             "by_run": run}, segment=r.segment, run_id=r.run_id)
    for row in _staged_rows(staged, replaced):
        record_event(con, "batch_staged", {**row, "from": None, "to": "staged", "basis_sha256": basis},
                     segment=row["segment"], run_id=run)
