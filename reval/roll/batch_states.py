"""A segment's batches as the roll sees them: its open batch (the newest staged or held one) and its
certified batch (the approved one, else the latest exported one). The one implementation of that rule,
on plain rows (no pandas), so the app's overview, `reval batches`, the value step and the export read it
alike. Certified and open are shown side by side ("approved, run 3 · run 4 pending"): the export writes
the certified values, never the pending ones. A batch is outdated when a data correction or an override of
one of its parcels came after it was staged (`mark_outdated`): its values stay as they were, but it cannot be
approved, and the next `reval value` stages the segment again."""
from __future__ import annotations

from typing import Any, TypedDict

from reval.clock import utc_now
from reval.data.store import Store
from reval.results import OutdatedBatch
from reval.states import OPEN_STATES, BatchState


class SegmentBatches(TypedDict):
    """One segment's open and certified batch (None where it has none) and how they read side by side."""

    segment: str
    open: dict[str, Any] | None
    certified: dict[str, Any] | None
    other_standards: bool   # its approval was judged under standards that differ from the config's now
    summary: str            # e.g. "approved, run 3 · run 4 pending"


def live_batches(store: Store, segment: str | None = None) -> list[dict[str, Any]]:
    """Batches that still count (staged, held, approved, exported), newest first per segment."""
    return [r for r in store.records("batch_live") if segment is None or r["segment"] == segment]


def run_numbers(store: Store) -> dict[str, int]:
    """Each run's number in order of creation (run 1 is the oldest)."""
    return {str(run): int(number) for run, number in store.rows("run_numbers")}


def outdated(batch: dict[str, Any] | None) -> bool:
    """Whether a batch's values no longer match the data or the overrides of its segment."""
    return batch is not None and batch.get("outdated_at") is not None


def mark_outdated(store: Store, segment: str) -> list[OutdatedBatch]:
    """Mark the segment's live batches outdated (inside the caller's transaction); returns all its outdated ones."""
    store.run("batch_mark_outdated", {"segment": segment, "at": utc_now()})
    return [{"batch_id": int(b), "state": str(s), "run_id": str(r)} for b, s, r in store.rows("batch_outdated", [segment])]


def summary(open_batch: dict[str, Any] | None, certified: dict[str, Any] | None, other_standards: bool,
            numbers: dict[str, int]) -> str:
    """Certified and open batch side by side, with their runs by number."""
    def run(batch: dict[str, Any]) -> str:
        return f"run {numbers.get(batch['run_id'], batch['run_id'])}"

    parts = []
    if certified is not None:
        word = "approved under other standards" if other_standards else certified["state"]
        parts.append(f"{word}, {run(certified)}")
    if open_batch is not None:
        word = "pending" if open_batch["state"] == "staged" else open_batch["state"]
        parts.append(f"{run(open_batch)} {word}" if certified is not None else f"{open_batch['state']}, {run(open_batch)}")
    if outdated(open_batch) or (open_batch is None and outdated(certified)):
        parts.append("outdated by a correction or override: value again")
    return " · ".join(parts) or "no batch"


def segment_states(store: Store, judged_sha256: str | None = None) -> list[SegmentBatches]:
    """Per imported segment: its open batch and its certified batch; an approval judged under another basis
    than `judged_sha256` (the config's now, reval/stats/judging.py) is marked."""
    certified = {r["segment"]: r for r in store.records("batch_certified")}
    opened: dict[str, dict[str, Any]] = {}
    for r in live_batches(store):
        if r["state"] in OPEN_STATES:
            opened.setdefault(r["segment"], r)
    numbers = run_numbers(store)
    out = []
    for (s,) in store.rows("roll_segments"):
        cert, open_batch = certified.get(s), opened.get(s)
        other = bool(cert is not None and cert["state"] == "approved" and judged_sha256 is not None
                     and cert["judged_sha256"] is not None and cert["judged_sha256"] != judged_sha256)
        out.append(SegmentBatches(segment=s, open=open_batch, certified=cert, other_standards=other,
                                  summary=summary(open_batch, cert, other, numbers)))
    return out


def standing_decision(entry: SegmentBatches) -> dict[str, Any] | None:
    """The decision a re-stage of the segment would set aside: its held batch, else its approved one."""
    if entry["open"] is not None and entry["open"]["state"] == "held":
        return entry["open"]
    if entry["certified"] is not None and entry["certified"]["state"] == "approved":
        return entry["certified"]
    return None


def current_batch(entry: SegmentBatches) -> dict[str, Any] | None:
    """The batch whose values a segment shows now: its open batch, else its certified batch."""
    return entry["open"] or entry["certified"]


def state_of(entry: SegmentBatches) -> BatchState | None:
    """A segment's state in one word: its open batch's, else its certified batch's, else None."""
    batch = current_batch(entry)
    return None if batch is None else batch["state"]
