"""The steps that write, as the app offers them: what each asks for, and the one line that reports its
outcome."""
from __future__ import annotations

from collections.abc import Callable
from typing import Any

from reval.service.types import (Decision, ExportResult, FitSummary, OverrideResult, ParcelReport, ReportResult,
                                 SaleDecision, StagePlan, StageResult)
from reval.service.wording import money

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


# sale decision -> (prompt title, what is asked for); reval.service.actions.decide_sale
SALE_DECISIONS: dict[str, tuple[str, str]] = {
    "exclude": ("Exclude sale {sale_id} from models and ratio studies", "reason (kept in the audit log)"),
    "include": ("Reinstate sale {sale_id} at full weight in the fit", "reason (kept in the audit log)"),
}


def describe_sale_decision(result: SaleDecision) -> str:
    done = "excluded" if result["decision"] == "exclude" else "reinstated"
    state = ("" if result["qualified"] is None else
             "; qualified" if result["qualified"] else f"; not qualified ({result['qualification']})")
    return f"Sale {result['sale_id']} {done}: {result['reason']}{state}. The next fit (f) honours it."
def parse_override(text: str) -> tuple[float, str, str | None]:
    """The override prompt's line "VALUE REASON [NOTE ...]" as (value, reason, note); ValueError says what is
    wrong. The value may carry thousands separators (245,000)."""
    parts = text.split(maxsplit=2)
    if len(parts) < 2:
        raise ValueError("Write the value, then the reason code, then an optional note: 245000 appeal_decision ...")
    try:
        value = float(parts[0].replace(",", "").replace("_", ""))
    except ValueError:
        raise ValueError(f"{parts[0]!r} is not an amount; write the value first, e.g. 245000") from None
    return value, parts[1], parts[2] if len(parts) > 2 else None


def describe_override(result: OverrideResult) -> str:
    if result["override"] is None:
        text = f"Override of parcel {result['parcel_id']} removed"
    else:
        text = (f"Parcel {result['parcel_id']} overridden at {result['override']['value']:,.0f} "
                f"({result['override']['reason']})")
    if result["outdated"]:
        text += f"; segment {result['segment']} needs its values staged again (v) and a new decision"
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


def describe_parcel_report(result: ParcelReport) -> str:
    grid = result["comparables"]
    comparables = f", {len(grid['comparables'])} comparable sales" if grid else ""
    return (f"Report of parcel {result['parcel_id']} written to {result['report']} "
            f"(value {money(result['value']['value'])}{comparables}).")


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
