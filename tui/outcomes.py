"""The steps that write, as the app offers them: what each asks for, and the one line that reports its
outcome."""
from __future__ import annotations

from collections.abc import Callable
from typing import Any

from reval.service.types import Decision, ExportResult, FitSummary, ReportResult, StagePlan, StageResult

Describe = Callable[[Any], str]
# decision -> (prompt title, what is asked for, required?); the action of the same name in reval.service.actions
DECISIONS: dict[str, tuple[str, str, bool]] = {
    "approve": ("Approve the staged batch of {segment}",
                "note (optional; needed to approve over failing statistics)", False),
    "hold": ("Hold the staged batch of {segment}", "reason", True),
    "revoke": ("Revoke the approval of {segment} (before export)", "note saying why", True),
}


def describe_decision(result: Decision) -> str:
    text = f"{result['segment']}: batch {result['batch_id']} (run {result['run_id']}) is now {result['state']}"
    if result.get("override"):
        text += f", approved over failing statistics ({'; '.join(result['failed'])}); note stored"
    elif result.get("note"):
        text += "; note stored"
    return text + "."


def describe_export(result: ExportResult) -> str:
    text = f"Exported {result['rows']:,} parcels to {result['path']}; manifest {result['manifest']}"
    if result["not_approved"]:
        text += f"; partial: left out (not approved) {', '.join(result['not_approved'])}"
    if result["pending_batches"]:
        text += "; certified values written where a newer batch is pending: " + ", ".join(
            f"{p['segment']} (run {p['run_id']} {p['state']})" for p in result["pending_batches"])
    return text + "."


REPORT_NAME = "ratio_study_report.html"   # where the app writes the report, in the project folder


def describe_report(result: ReportResult) -> str:
    return (f"Ratio-study report of {result['values']} written to {result['path']} ({result['figures']} plots); "
            "for a PDF: reval report NAME.pdf.")


def describe_fit(result: FitSummary) -> str:
    seconds = sum(result["timings"].values())
    return (f"Fit done: run {result['run_id']}, {result['segments']} segments, {result['sales']:,} sales, "
            f"{result['parcels']:,} parcels valued in {seconds:.0f} s. Press v to stage values for review.")


def describe_values(result: StageResult) -> str:
    kept = f"; decisions kept: {', '.join(d['segment'] for d in result['kept'])}" if result["kept"] else ""
    return (f"Values of run {result['run_id']} staged: {len(result['staged'])} batch(es); "
            f"{len(result['unchanged'])} segment(s) already held this run's batch{kept}.")


def staging_lines(plan: StagePlan) -> list[str]:
    """What staging would do, line by line: the decisions it sets aside first, then those it keeps."""
    lines = [f"Run {plan['run_id']}: {len(plan['stage'])} segment(s) to stage"
             + (f" ({', '.join(plan['stage'])})" if 0 < len(plan["stage"]) <= 6 else "") + "."]
    if plan["unchanged"]:
        lines.append(f"{len(plan['unchanged'])} segment(s) already hold a batch of this run: unchanged.")
    for d in plan["set_aside"]:
        lines.append(f"Sets aside: {d['segment']} {d['state']} (batch {d['batch_id']}, run {d['run_id']}"
                     + (f", '{d['note']}'" if d["note"] else "") + f"): {d['on_restage']}.")
    for d in plan["kept"]:
        lines.append(f"Kept: {d['segment']} {d['state']} (batch {d['batch_id']}, run {d['run_id']}).")
    return lines
