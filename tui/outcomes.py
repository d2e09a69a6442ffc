"""The steps that write, as the app offers them: what each asks for, and the one line that reports its
outcome."""
from __future__ import annotations

from collections.abc import Callable
from typing import Any

from reval.service.types import (Decision, ExportResult, FitSummary, ImportSummary, OverrideResult, ParcelReport,
                                 ReportResult, SaleDecision, SalesCounts, StagePlan, StageResult, StudyResult)
from reval.service.wording import money

from .jobs import JobProgressed

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


def describe_import(result: ImportSummary) -> str:
    if not result["changed"]:
        return "Import: the input files are unchanged since the last import; nothing changed."
    return (f"Imported {result['parcels']:,} parcels, {result['sales']:,} sales, {result['segments']} segments, "
            f"{result['market_areas']} market areas. Press u to prepare the sales.")


def describe_sales(result: SalesCounts) -> str:
    notes = "".join(f" Market trend: {note}." for note in result["trend_notes"])
    return (f"Sales: {result['qualified']:,} qualified, {result['excluded']:,} excluded (E lists them with why).{notes}"
            " Press t for a ratio study of the prior values, f to fit.")


def describe_study(result: StudyResult) -> str:
    failing = [g["group"] for g in result["groups"] if any(v["status"] == "fail" for v in g["verdicts"].values())]
    return (f"Ratio study of {result['values']}: {len(result['groups'])} segments, {len(failing)} failing a "
            "standard." + (f" {result['warning']}" if result.get("warning") else ""))
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


# the phases each job reports through its progress callback, in order: one bar runs over all of them
JOB_PHASES: dict[str, tuple[str, ...]] = {
    "fit": ("fitting segments", "out-of-fold folds", "reference models"),
    "import": ("reading files",),
    "sales": ("qualifying sales",),
}

FIT_LINES = [
    "A new run: every segment's model is fitted, checked out of fold on its sales and compared with the "
    "reference models (seconds on the demo, minutes on a large roll).",
    "Staged, held and approved batches stay as they are; press v afterwards to stage the new run's values.",
    "Ctrl+K cancels it; a cancelled fit keeps nothing.",
]

# the core's messages name command-line commands and options; the app says which key or box does it
APP_WORDING: tuple[tuple[str, str], ...] = (
    ("run `reval value` after a run", "press v to stage values after a fit (f)"),
    ("a new run and `reval value` stage it again", "after a new run (f), V re-stages it"),
    ("export the approved segments alone with --partial",
     "tick 'Partial export' in the export dialog (x) to export the approved segments alone"),
    ("Give --replace to stage them anyway", "Re-stage them with r in the staging confirmation, or V on one segment"),
    ("run `reval fit` again", "press f to fit again"),
    ("run `reval fit` first", "press f to fit first"),
    ("run `reval value` first", "press v to stage values first"),
    ("run `reval import` first", "press i on the steps screen (W) to import"),
    ("run `reval sales` before `reval fit`", "press u on the steps screen (W) to prepare the sales before fitting"),
    ("run `reval sales` first", "press u on the steps screen (W) to prepare the sales first"),
    ("(run `reval sales` and `reval study`)", "(W: the steps screen)"),
    ("choose another file name or give --overwrite to replace it", "choose another file name"),
)


def app_wording(text: str) -> str:
    """A core message with its command-line hints replaced by the app's keys and checkboxes."""
    for cli, app in APP_WORDING:
        text = text.replace(cli, app)
    return text


def job_fraction(kind: str, step: str, done: int, total: int) -> float:
    """How far the whole job is (0-1): its finished phases and the share done of the current one."""
    phases = JOB_PHASES.get(kind, ())
    index = phases.index(step) if step in phases else 0
    count = max(len(phases), 1)
    return min(1.0, (index + done / max(total, 1)) / count)


def job_line(label: str, kind: str, progress: JobProgressed | None) -> str:
    """The one status line of a running job: what runs, its phase of the whole, and how to cancel it."""
    if progress is None:
        return f"{label}… · Ctrl+K cancels"
    phases = JOB_PHASES.get(kind, ())
    where = (f"step {phases.index(progress.step) + 1} of {len(phases)}, " if progress.step in phases and len(phases) > 1
             else "")
    return f"{label} · {where}{progress.step} {progress.done}/{progress.total} · Ctrl+K cancels"
