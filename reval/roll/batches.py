"""Batch states and their transitions: approve, hold, revoke; each one transaction and one event.

staged -> approved | held; held -> staged again only through a new value step (`reval value SEGMENT
--replace` after a new run or a changed basis); approved -> exported (reval.export), or back to staged when
revoked before export (to 'replaced' when a newer open batch already exists). Approval needs the segment's
out-of-fold ratio statistics of the batch's run, judged at that moment under the current standards and
study settings (a stored study only when it was computed on the same sales under the same basis, which is
the same computation), to pass, or an override note, which is stored; a batch with a parcel left without a
value (reval/roll/flags.py `approval_blockers`) cannot be approved at all.
The event keeps that snapshot and the batch the fingerprint of the standards it was judged under
(reval/stats/judging.py). Approving a newer batch marks the segment's earlier approved one 'superseded'.
Approved values never change.
"""
from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from reval.clock import utc_now
from reval.data.config import Config
from reval.errors import UserError
from reval.data.events import record_event
from reval.stats.judging import failures, judging_basis, judging_sha256
from reval.data.store import Store
from reval.roll.batch_states import live_batches, outdated
from reval.roll.flags import approval_blockers
from reval.states import BatchState, ValuesSource
from reval.stats.study import segments_judgement
from reval.results import AllPassing, Decision, LeftSegment

OUT_OF_FOLD: ValuesSource = "model_out_of_fold"


def _known(store: Store, segment: str) -> None:
    if segment not in {r[0] for r in store.rows("roll_segments")}:
        raise UserError(f"No segment named '{segment}'.")


def segments_statistics(store: Store, config: Config, runs: Mapping[str, str]) -> dict[str, dict[str, Any]]:
    """Each segment's out-of-fold ratio statistics of its run (`runs`: segment -> run id), computed now under
    the current standards and study settings, with the basis they were judged under (what an event stores);
    each run's sales are read once."""
    by_run: dict[str, list[str]] = {}
    for segment, run_id in runs.items():
        by_run.setdefault(run_id, []).append(segment)
    sha256, basis = judging_sha256(config), judging_basis(config)
    out = {}
    for run_id, segments in by_run.items():
        for segment, (group, classes) in segments_judgement(store, config, OUT_OF_FOLD, run_id, segments).items():
            out[segment] = {"run_id": run_id, **group, "classes": classes, "judged_sha256": sha256,
                            "judged_under": basis}
    return out


def segment_statistics(store: Store, config: Config, run_id: str, segment: str) -> dict[str, Any]:
    """One segment's out-of-fold ratio statistics of a run, as `segments_statistics` computes them."""
    return segments_statistics(store, config, {segment: run_id})[segment]


def _transition(store: Store, batches: list[dict[str, Any]], to: str, kind: str, note: str | None,
                details: list[dict[str, Any]]) -> None:
    """Move batches to `to` in one statement and record an event for each (its detail from `details`); the
    caller holds the transaction."""
    if not batches:
        return
    store.run("batch_set_state", {"batch_ids": [b["batch_id"] for b in batches], "state": to, "at": utc_now(),
                                  "note": note})
    for batch, detail in zip(batches, details, strict=True):
        record_event(store.con, kind, {"batch_id": batch["batch_id"], "from": batch["state"], "to": to,
                                       "note": note, **detail}, segment=batch["segment"], run_id=batch["run_id"])


def _totals(store: Store, batch_ids: list[int]) -> dict[int, dict[str, Any]]:
    """Value totals of each batch (parcels, prior, market and assessed value), for the event snapshot."""
    return {r.pop("batch_id"): r for r in store.records("batch_totals", [batch_ids])}


def _staged_refusal(live: list[dict[str, Any]], segment: str, action: str) -> str | None:
    """Why the segment has no staged batch to approve or hold (None when it has one)."""
    batch = next((b for b in live if b["state"] in ("staged", "held")), None)
    if batch is None:
        done = next((b for b in live if b["state"] in ("approved", "exported")), None)
        if done is not None and done["state"] == "approved":
            return (f"Cannot {action} {segment}: batch {done['batch_id']} is already approved; revoke that "
                    "approval first to decide again.")
        if done is not None:
            return (f"Cannot {action} {segment}: batch {done['batch_id']} is already exported; exported values "
                    "are final (a new run makes a new batch).")
        return f"Cannot {action} {segment}: it has no staged batch; run `reval value` after a run."
    if batch["state"] == "held":
        return (f"Cannot {action} {segment}: batch {batch['batch_id']} is held ({batch['note']}); "
                "a new run and `reval value` stage it again.")
    if outdated(batch):
        return (f"Cannot {action} {segment}: batch {batch['batch_id']} is outdated by a data correction or an "
                f"override made after it was staged; run `reval value {segment}` to stage its values again.")
    return None


def _open_batch(store: Store, segment: str, action: str) -> dict[str, Any]:
    """The segment's staged batch, read inside the caller's transaction; a plain refusal otherwise."""
    live = live_batches(store, segment)
    reason = _staged_refusal(live, segment, action)
    if reason is not None:
        raise UserError(reason)
    return next(b for b in live if b["state"] == "staged")


def refusal(store: Store, segment: str, action: str) -> str | None:
    """Why approving, holding or revoking the segment's batch would be refused now for its state (before a
    note is asked for), or None; the same rules the actions apply. The approval gate on statistics is not
    judged here: a note can override it."""
    if segment not in {r[0] for r in store.rows("roll_segments")}:
        return f"No segment named '{segment}'."
    live = live_batches(store, segment)
    if action != "revoke":
        state = _staged_refusal(live, segment, action)
        if state is None and action == "approve":
            return _blocked(store, segment, next(b for b in live if b["state"] == "staged")["batch_id"])
        return state
    try:
        _approved_batch(live, segment)
    except UserError as refused:
        return str(refused)
    return None


def _blocked(store: Store, segment: str, batch_id: int) -> str | None:
    """Why the batch cannot be approved whatever its statistics and any note (rows without a value), or None."""
    blockers = approval_blockers(store, [batch_id]).get(batch_id)
    return f"Cannot approve {segment}: {'; '.join(blockers)}. A note does not override this." if blockers else None


def _note(text: str | None) -> str | None:
    return text.strip() if text and text.strip() else None


def approve(store: Store, config: Config, segment: str, note: str | None = None) -> Decision:
    """Approve the segment's staged batch when its out-of-fold statistics pass, or with an override note."""
    _known(store, segment)
    note = _note(note)
    staged = _open_batch(store, segment, "approve")
    run_id = staged["run_id"]
    blocked = _blocked(store, segment, staged["batch_id"])
    if blocked:
        raise UserError(blocked)
    statistics = segment_statistics(store, config, run_id, segment)
    reasons = failures(statistics)
    if reasons and note is None:
        raise UserError(f"Cannot approve {segment}: its out-of-fold ratio statistics of run {run_id} do not pass "
                        f"the standards: {'; '.join(reasons)}. Approve with a note to override (the note is stored).")
    with store.transaction():
        batch = _open_batch(store, segment, "approve")
        if batch["batch_id"] != staged["batch_id"]:
            raise UserError(f"The batch of {segment} changed while approving; try again.")
        totals = _totals(store, [batch["batch_id"]])[batch["batch_id"]]
        earlier = [b for b in live_batches(store, segment) if b["state"] == "approved"]
        _transition(store, earlier, "superseded", "batch_superseded", None,
                    [{"by_batch_id": batch["batch_id"]}] * len(earlier))
        _transition(store, [batch], "approved", "batch_approved", note,
                    [{"override": bool(reasons), "failed": reasons, "statistics": statistics, "totals": totals}])
        store.run("batch_set_judged", {"batch_ids": [batch["batch_id"]], "sha256": statistics["judged_sha256"]})
    return {"segment": segment, "batch_id": batch["batch_id"], "run_id": run_id, "state": "approved",
            "override": bool(reasons), "failed": reasons, "note": note, "statistics": statistics,
            "superseded": [b["batch_id"] for b in earlier]}


def hold(store: Store, config: Config, segment: str, reason: str) -> Decision:
    """Hold the segment's staged batch; a reason is required."""
    _known(store, segment)
    note = _note(reason)
    if note is None:
        raise UserError(f"Cannot hold {segment}: give a reason.")
    run_id = _open_batch(store, segment, "hold")["run_id"]
    statistics = segment_statistics(store, config, run_id, segment)
    with store.transaction():
        batch = _open_batch(store, segment, "hold")
        _transition(store, [batch], "held", "batch_held", note, [{"statistics": statistics}])
    return {"segment": segment, "batch_id": batch["batch_id"], "run_id": batch["run_id"], "state": "held",
            "note": note, "statistics": statistics}


def _approved_batch(live: list[dict[str, Any]], segment: str) -> dict[str, Any]:
    batch = next((b for b in live if b["state"] == "approved"), None)
    if batch is not None:
        return batch
    exported = next((b for b in live if b["state"] == "exported"), None)
    if exported is not None:
        raise UserError(f"Cannot revoke {segment}: batch {exported['batch_id']} was exported; exported values "
                        "are final (a new run makes a new batch).")
    raise UserError(f"Cannot revoke {segment}: it has no approved batch.")


def revoke(store: Store, config: Config, segment: str, note: str) -> Decision:
    """Withdraw the segment's approval before export; a note is required. Exported batches cannot be revoked."""
    _known(store, segment)
    text = _note(note)
    if text is None:
        raise UserError(f"Cannot revoke {segment}: give a note saying why.")
    target = _approved_batch(live_batches(store, segment), segment)
    statistics = segment_statistics(store, config, target["run_id"], segment)
    with store.transaction():
        live = live_batches(store, segment)
        batch = _approved_batch(live, segment)
        if batch["batch_id"] != target["batch_id"]:
            raise UserError(f"The approved batch of {segment} changed while revoking; try again.")
        to: BatchState = "replaced" if any(b["state"] in ("staged", "held") for b in live) else "staged"
        _transition(store, [batch], to, "batch_revoked", text, [{"statistics": statistics}])
    return {"segment": segment, "batch_id": batch["batch_id"], "run_id": batch["run_id"], "state": to,
            "note": text, "statistics": statistics}


def _open_batches(live: list[dict[str, Any]]) -> dict[str, dict[str, Any]]:
    """Each segment's open batch (its newest staged or held one); `live` is newest first per segment."""
    out: dict[str, dict[str, Any]] = {}
    for b in live:
        if b["state"] in ("staged", "held"):
            out.setdefault(b["segment"], b)
    return out


def _why(refusal: str, segment: str) -> str:
    """A single approval's refusal as the reason a segment was left (its "Cannot approve SEGMENT: " dropped)."""
    return refusal.removeprefix(f"Cannot approve {segment}: ").removesuffix(".")


def approve_all_passing(store: Store, config: Config) -> AllPassing:
    """Approve, in one transaction, every staged batch whose out-of-fold statistics pass the standards in force
    (the rule of `failures`, as a single approval judges it); every other segment is left with the reason a single
    approval refuses it for (`_staged_refusal`: held, outdated, already decided, nothing staged; then
    `approval_blockers`)."""
    live = live_batches(store)
    opened = _open_batches(live)
    segments = sorted(r[0] for r in store.rows("roll_segments"))
    by_segment: dict[str, list[dict[str, Any]]] = {}
    for b in live:
        by_segment.setdefault(b["segment"], []).append(b)
    refused = {s: _why(r, s) for s in segments
               if (r := _staged_refusal(by_segment.get(s, []), s, "approve")) is not None}
    staged = {s: opened[s] for s in segments if s not in refused}
    blockers = approval_blockers(store, [b["batch_id"] for b in staged.values()])
    refused |= {s: "; ".join(blockers[b["batch_id"]]) for s, b in staged.items() if b["batch_id"] in blockers}
    statistics = segments_statistics(store, config, {s: b["run_id"] for s, b in staged.items() if s not in refused})
    left: list[LeftSegment] = []
    passing = []
    for segment in segments:
        if segment in refused:
            left.append({"segment": segment, "reason": refused[segment]})
        elif reasons := failures(statistics[segment]):
            left.append({"segment": segment, "reason": "; ".join(reasons)})
        else:
            passing.append(staged[segment])
    with store.transaction():
        now = live_batches(store)
        if ({s: (b["batch_id"], outdated(b)) for s, b in _open_batches(now).items()}
                != {s: (b["batch_id"], outdated(b)) for s, b in opened.items()}):
            raise UserError("The batches changed while approving; try again.")
        ids = {b["segment"]: b["batch_id"] for b in passing}
        earlier = [b for b in now if b["state"] == "approved" and b["segment"] in ids]
        _transition(store, earlier, "superseded", "batch_superseded", None,
                    [{"by_batch_id": ids[b["segment"]]} for b in earlier])
        totals = _totals(store, list(ids.values()))
        _transition(store, passing, "approved", "batch_approved", None,
                    [{"override": False, "failed": [], "statistics": statistics[b["segment"]],
                      "totals": totals[b["batch_id"]]} for b in passing])
        store.run("batch_set_judged", {"batch_ids": list(ids.values()), "sha256": judging_sha256(config)})
    superseded = {b["segment"]: b["batch_id"] for b in earlier}
    approved: list[Decision] = [
        {"segment": b["segment"], "batch_id": b["batch_id"], "run_id": b["run_id"], "state": "approved",
         "override": False, "failed": [], "note": None, "statistics": statistics[b["segment"]],
         "superseded": [superseded[b["segment"]]] if b["segment"] in superseded else []} for b in passing]
    return {"approved": approved, "left": left}
