"""Overrides: a market value the analyst sets on one parcel, with a reason code from `[overrides] reasons`.

The overrides sit in their own table above the model's values, keyed by parcel id, so they survive refits,
re-stages and re-imports. Staging (sql/queries/roll_insert_values.sql) puts the override on the roll in place
of the run's estimate, keeping the model's value and the reason beside it; the export shows both. Setting or
removing an override is an event and marks the segment's batches outdated (reval/roll/batch_states.py): the
segment is valued again and decided again before the change reaches the roll. Ratio studies of model values
leave overridden parcels' sales out; the study of final values (`--values final`) includes them.
"""
from __future__ import annotations

import math
from typing import Any

from reval.clock import utc_now
from reval.data.config import Config
from reval.data.events import current_user, record_event
from reval.data.store import Store
from reval.errors import UserError
from reval.results import OverrideResult
from reval.roll.batch_states import mark_outdated


def parcel_segment(store: Store, parcel_id: str) -> str:
    """The segment of an imported parcel; a plain message naming the id otherwise."""
    found = store.records("app_parcel", [parcel_id])
    if not found:
        near = [r[0] for r in store.rows("app_parcel_suggest", [parcel_id, 5])] if parcel_id else []
        hint = f" (did you mean {', '.join(near)}?)" if near else ""
        raise UserError(f"No parcel with id {parcel_id!r} in the imported data{hint}. Nothing was changed.")
    return str(found[0]["segment"])


def _model_value(store: Store, parcel_id: str) -> tuple[str | None, float | None]:
    runs = store.rows("roll_latest_run")
    if not runs:
        return None, None
    run_id = str(runs[0][0])
    found = store.records("app_parcel_estimate", [run_id, parcel_id])
    return run_id, (float(found[0]["market_value"]) if found else None)


def _standing(store: Store, parcel_id: str) -> dict[str, Any] | None:
    found = store.records("override_get", [parcel_id])
    return {**found[0], "set_at": str(found[0]["set_at"])} if found else None


def set_override(store: Store, config: Config, parcel_id: str, value: float, reason: str,
                 note: str | None = None) -> OverrideResult:
    """Set the parcel's market value to `value` for `reason` (a code of [overrides] reasons); one transaction
    with its event."""
    parcel_id, reason, text = parcel_id.strip(), reason.strip(), (note or "").strip() or None
    codes = config.overrides.reasons
    if reason not in codes:
        raise UserError(f"Unknown override reason {reason!r}: give one of {', '.join(codes)} ([overrides] reasons in "
                        "reval.toml). Nothing was changed.")
    if not math.isfinite(value) or value <= 0 or value > config.max_amount:
        raise UserError(f"An override must be a positive amount of at most {config.max_amount:,.0f} "
                        f"([files] max_amount); got {value!r}. Nothing was changed.")
    with store.transaction() as con:
        segment = parcel_segment(store, parcel_id)
        previous = _standing(store, parcel_id)
        run_id, model_value = _model_value(store, parcel_id)
        store.run("override_set", [parcel_id, value, reason, text, utc_now(), current_user()])
        outdated = mark_outdated(store, segment)
        override = _standing(store, parcel_id)
        record_event(con, "override_set", {"parcel_id": parcel_id, "value": value, "reason": reason, "note": text,
                                           "previous": previous, "model_value": model_value,
                                           "outdated_batches": [b["batch_id"] for b in outdated]},
                     segment=segment, run_id=run_id)
    return {"parcel_id": parcel_id, "segment": segment, "action": "set", "override": override, "previous": previous,
            "model_value": model_value, "run_id": run_id, "outdated": outdated}


def remove_override(store: Store, parcel_id: str, note: str) -> OverrideResult:
    """Remove the parcel's override, with a note saying why; the model's value applies again at the next value
    step. One transaction with its event."""
    parcel_id, text = parcel_id.strip(), (note or "").strip()
    if not text:
        raise UserError("Give the reason for removing the override with --note; it is kept in the audit log. "
                        "Nothing was changed.")
    with store.transaction() as con:
        segment = parcel_segment(store, parcel_id)
        previous = _standing(store, parcel_id)
        if previous is None:
            raise UserError(f"Parcel {parcel_id} has no override to remove. Nothing was changed.")
        run_id, model_value = _model_value(store, parcel_id)
        store.run("override_remove", [parcel_id])
        outdated = mark_outdated(store, segment)
        record_event(con, "override_removed", {"parcel_id": parcel_id, "note": text, "removed": previous,
                                               "model_value": model_value,
                                               "outdated_batches": [b["batch_id"] for b in outdated]},
                     segment=segment, run_id=run_id)
    return {"parcel_id": parcel_id, "segment": segment, "action": "removed", "override": None, "previous": previous,
            "model_value": model_value, "run_id": run_id, "outdated": outdated}
