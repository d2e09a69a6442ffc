"""A segment's batches as the roll sees them: its open batch (the newest staged or held one) and its
certified batch (the approved one, else the latest exported one). The one implementation of that rule,
on plain rows (no pandas), so the app's overview and the core's decisions read it alike."""
from __future__ import annotations

from typing import Any, TypedDict

from reval.data.store import Store
from reval.states import OPEN_STATES, BatchState


class SegmentBatches(TypedDict):
    """One segment's open and certified batch (None where it has none)."""

    segment: str
    open: dict[str, Any] | None
    certified: dict[str, Any] | None


def live_batches(store: Store, segment: str | None = None) -> list[dict[str, Any]]:
    """Batches that still count (staged, held, approved, exported), newest first per segment."""
    return [r for r in store.records("batch_live") if segment is None or r["segment"] == segment]


def segment_states(store: Store) -> list[SegmentBatches]:
    """Per imported segment: its open batch and its certified batch."""
    certified = {r["segment"]: r for r in store.records("batch_certified")}
    opened: dict[str, dict[str, Any]] = {}
    for r in live_batches(store):
        if r["state"] in OPEN_STATES:
            opened.setdefault(r["segment"], r)
    return [SegmentBatches(segment=s, open=opened.get(s), certified=certified.get(s))
            for (s,) in store.rows("roll_segments")]


def state_of(entry: SegmentBatches) -> BatchState | None:
    """A segment's state in one word: its open batch's, else its certified batch's, else None."""
    batch = entry["open"] or entry["certified"]
    return None if batch is None else batch["state"]
