"""Every action a user can take, one function each, shared by the command line and the app.

Each opens the project with `open_project` (read-only unless the action writes) and calls the core.
The core's step modules load pandas, SciPy and scikit-learn, so they are imported inside the action
that needs them: the app's start-up and `reval --help` do not wait for them.
"""
from __future__ import annotations

import json
import shutil
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from reval.data.config import CONFIG_NAME
from reval.errors import UserError
from reval.service.project import open_project
from reval.states import Grouping, SaleChoice, ValuesSource

if TYPE_CHECKING:  # the results' types only; their modules load when the action runs
    from reval.plain import Record
    from reval.service.types import (AllPassing, BatchStates, CheckReport, CompareResult, CorrectionResult, Decision,
                                     DemoSummary, Event, EventLog, Explanation, ExportResult, FitSummary,
                                     ImportSummary, OverrideResult, ParcelReport, ReportResult, ReviewReport,
                                     SaleDecision, SalesCounts, StagePlan, StageResult, StudyResult, ValueSplit)

Progress = Callable[[str, int, int], None]
DEMO_SOURCE = Path(__file__).resolve().parents[2] / "data_samples" / "demo"
DEMO_FILES = ("reval.toml", "parcels.csv", "sales.csv", "land_schedule.csv")


# ---- the project and its data ----------------------------------------------------------------------------

def init_project(folder: Path, name: str) -> Path:
    """Create a project folder with a commented starter reval.toml; never overwrite one."""
    from reval.data.starter import starter_config

    path = folder / CONFIG_NAME
    if folder.exists() and not folder.is_dir():
        raise UserError(f"{folder} is a file, not a folder; name a new or existing folder for the project")
    text = starter_config(name)
    try:
        folder.mkdir(parents=True, exist_ok=True)
        with path.open("x", encoding="utf-8") as handle:   # "x": never replaces a file, even one made meanwhile
            handle.write(text)
    except FileExistsError:
        raise UserError(f"{path} already exists; reval init never overwrites a config") from None
    except OSError as exc:
        raise UserError(f"Cannot write {path}: {exc.strerror or exc}") from None
    return path


def import_data(folder: Path, progress: Progress | None = None, allow_empty: bool = False) -> ImportSummary:
    """Check and load the project's input files (all or nothing); a file without data rows only with
    allow_empty."""
    from reval.data.config import load_config
    from reval.data.importer import run_import

    return run_import(load_config(folder), progress, allow_empty=allow_empty).as_dict()


def prepare_sales(folder: Path, progress: Progress | None = None) -> SalesCounts:
    """Qualify sales and time-adjust them to the valuation date."""
    from reval.data.sales import prepare_sales as prepare

    with open_project(folder, write=True) as (config, store):
        return prepare(store, config, progress).as_dict()


def decide_sale(folder: Path, sale_id: str, decision: SaleChoice, reason: str) -> SaleDecision:
    """Exclude one sale from models and ratio studies, or include it at full weight in the fit, with a reason;
    the sales are re-qualified at once, so the next fit honours it."""
    from reval.data.decisions import decide_sale as decide

    with open_project(folder, write=True) as (config, store):
        return decide(store, config, sale_id, decision, reason)


def sales_report(folder: Path) -> SalesCounts:
    """The stored qualification counts and the repeat sales."""
    from reval.data.sales import stored_summary

    with open_project(folder) as (config, store):
        return stored_summary(store, config).as_dict()


def check_data(folder: Path, csv_path: Path | None = None) -> CheckReport:
    """The data-quality check before fitting: problems per segment and check, and every row in a CSV when
    `csv_path` is given (the database is only read)."""
    from reval.data import check

    with open_project(folder) as (config, store):
        return check.check_report(store, config, csv_path)


def segment_overview(folder: Path) -> list[Record]:
    """One row per segment with its parcel and sale counts."""
    with open_project(folder) as (_, store):
        return store.records("segment_counts")


# ---- studies and models --------------------------------------------------------------------------------------

def study(folder: Path, values: str = "prior", by: Grouping = "segment", run_id: str | None = None,
          in_sample: bool = False) -> StudyResult:
    """Run and store a ratio study; model values (the latest run unless named) are out-of-fold unless
    in_sample is asked for; final values are the roll's after overrides."""
    from reval.roll.valuation import resolve_run
    from reval.stats.study import run_study

    source: ValuesSource = ("prior" if values == "prior" else "final" if values == "final"
                            else "model_in_sample" if in_sample else "model_out_of_fold")
    with open_project(folder, write=True) as (config, store):
        run = None if source in ("prior", "final") else resolve_run(store, run_id)
        return run_study(store, config, source, by, run)


def combined_study(folders: list[Path], values: str = "prior", in_sample: bool = False) -> StudyResult:
    """A ratio study across projects, each read only (its latest run for model values), one group per project
    and all together, judged under the first project's standards and study settings."""
    from reval.roll.valuation import resolve_run
    from reval.stats.study import combined_study as study_across, sales_for_study

    source: ValuesSource = "prior" if values == "prior" else "model_in_sample" if in_sample else "model_out_of_fold"
    names = [f.resolve().name for f in folders]
    if len(set(names)) < len(names):
        names = [str(f) for f in folders]
    frames, configs = [], []
    for name, folder in zip(names, folders, strict=True):
        with open_project(folder) as (config, store):
            run = None if source == "prior" else resolve_run(store, None)
            frames.append((name, sales_for_study(store, source, run)))
            configs.append(config)
    return study_across(frames, configs[0], source)


def report(folder: Path, out: Path, values: str | None = "prior", run_id: str | None = None) -> ReportResult:
    """Write the ratio-study report (HTML or PDF, by the suffix of `out`) for prior or model values (out-of-fold,
    the latest run unless named; values None: model values if there is a run, else prior); groupings not
    studied with those values since the sales last changed are studied and stored first."""
    from reval.report.study_report import write_report
    from reval.roll.valuation import resolve_run

    with open_project(folder, write=True) as (config, store):
        latest = store.rows("app_latest_run")
        source: ValuesSource = "prior" if values == "prior" or (values is None and not latest) else "model_out_of_fold"
        run = None if source == "prior" else resolve_run(store, run_id)
        model_run = run or (str(latest[0][0]) if latest else None)
        return write_report(store, config, out, source, run, model_run)


def fit(folder: Path, progress: Progress | None = None, jobs: int | None = None,
        scheduler: str | None = None) -> FitSummary:
    """Fit every segment's model, validate out of fold, compare with the reference models, store a run; the fits
    run on `jobs` local processes or on the Dask cluster at `scheduler` (default: the config's)."""
    from reval.model.run import fit_run

    with open_project(folder, write=True) as (config, store):
        return fit_run(store, config, progress, jobs, scheduler=scheduler)


def compare(folder: Path, run_id: str | None = None) -> CompareResult:
    """Every model's out-of-fold accuracy on the same sales and folds, per segment and overall, with display
    names, the permutation importance of the references that store it, and the structure our model chose by
    evidence (each candidate's criterion value), for a run."""
    from reval.model.names import named
    from reval.roll.valuation import resolve_run

    with open_project(folder) as (_, store):
        run = resolve_run(store, run_id)
        rows = named(store.records("reference_accuracy_rows", [run]), group="segment")
        importance = named(store.records("feature_importance_rows", [run]))
        structure = store.records("run_structure_rows", [run])
    return {"run_id": run, "models": list(dict.fromkeys(r["model"] for r in rows)),
            "model_names": {r["model"]: r["model_name"] for r in rows}, "rows": rows, "importance": importance,
            "structure": structure}


# ---- the value roll --------------------------------------------------------------------------------------------

def stage_values(folder: Path, run_id: str | None = None, segments: list[str] | None = None,
                 replace: bool = False) -> StageResult:
    """Value the parcels of the named segments (default: every segment without a held or approved batch)
    from a run (default: the newest) and stage one batch per segment; `replace` also re-stages segments with
    a standing decision."""
    from reval.roll import valuation

    with open_project(folder, write=True) as (config, store):
        return valuation.stage_values(store, config, run_id, segments or None, replace)


def staging_plan(folder: Path, run_id: str | None = None, segments: list[str] | None = None,
                 replace: bool = False) -> StagePlan:
    """What `stage_values` with the same arguments would stage, keep and set aside (nothing is written)."""
    from reval.roll import valuation

    with open_project(folder) as (config, store):
        return valuation.plan_staging(store, config, run_id, segments or None, replace)


def review(folder: Path, segment: str | None = None, limit: int = 20) -> ReviewReport:
    """Value changes, parcels beyond the review threshold and the sales-chasing check, per segment."""
    from reval.roll.review import review as review_batches

    with open_project(folder) as (config, store):
        return review_batches(store, config, segment, limit)


def parcel_report(folder: Path, parcel_id: str, page: Path | None = None) -> ParcelReport:
    """Why one parcel has its value: the value (roll, else model), prior values, flags, its segment's ratio
    statistics, the explanation feature by feature (largest first) and the comparable sales adjusted by the
    latest run's model; with `page`, also written as a one-page report (.html or .pdf). An unknown id is refused
    with the closest ids."""
    from reval.report.document import check_path
    from reval.roll.comparables import comparable_grid
    from reval.service.views import read_parcel, segment_statistics
    from reval.service.wording import CAUTION

    if page is not None:
        check_path(page)
    with open_project(folder) as (config, store):
        d = read_parcel(store, config, parcel_id)
        estimate, roll = d["estimate"], (d["roll"][0] if d["roll"] else None)
        model_value = round(estimate["market_value"]) if estimate else None
        value = round(roll["market_value"]) if roll else model_value
        source = (f"roll, batch {roll['batch_id']} ({roll['state']})" if roll
                  else f"model, run {d['run_id']}" if estimate else "no value yet (run `reval fit`)")
        grid = comparable_grid(store, config, d["run_id"], d["parcel_id"]) if estimate and d["run_id"] else None
        result: ParcelReport = {
            "jurisdiction": config.jurisdiction, "valuation_date": config.valuation_date.isoformat(),
            "parcel_id": d["parcel_id"], "segment": d["segment"], "market_area": d["market_area"],
            "property_class": d["property_class"], "run_id": d["run_id"], "features": d["features"],
            "value": {"value": value, "source": source, "model_value": model_value, "roll": roll},
            "prior_values": d["prior_values"], "value_change": d["value_change"], "flags": d["flags"],
            "segment_statistics": segment_statistics(store, config, d["run_id"], d["segment"]),
            "explanation": _explanation(d["segment"], d["split"]), "comparables": grid, "caution": CAUTION,
            "report": None}
    if page is not None:
        from reval.report.parcel_page import write_parcel_page

        result["report"] = str(write_parcel_page(result, page))
    return result


def _explanation(segment: str, split: ValueSplit | None) -> Explanation | None:
    """The value split (reval.roll.split) as a reader wants it: parts largest first, each with its share."""
    if split is None:
        return None
    parts = sorted(split["parts"], key=lambda p: -abs(p["currency"]))
    return {"measured_from": f"segment {segment}'s base (every part at zero)",
            "base": split["base"], "value": split["value"],
            "parts": [{"term": p["term"], "currency": p["currency"], "percent": p["currency"] / split["value"],
                       "log": p["log"]} for p in parts]}


def approve(folder: Path, segment: str, note: str | None = None) -> Decision:
    """Approve a segment's staged batch (its out-of-fold statistics must pass, or give an override note)."""
    from reval.roll import batches

    with open_project(folder, write=True) as (config, store):
        return batches.approve(store, config, segment, note)


def approve_all_passing(folder: Path) -> AllPassing:
    """Approve every staged batch whose out-of-fold statistics pass, in one transaction; say why the rest were left."""
    from reval.roll import batches

    with open_project(folder, write=True) as (config, store):
        return batches.approve_all_passing(store, config)


def hold(folder: Path, segment: str, reason: str) -> Decision:
    """Hold a segment's staged batch, with a reason."""
    from reval.roll import batches

    with open_project(folder, write=True) as (config, store):
        return batches.hold(store, config, segment, reason)


def revoke(folder: Path, segment: str, note: str) -> Decision:
    """Withdraw a segment's approval before export, with a note."""
    from reval.roll import batches

    with open_project(folder, write=True) as (config, store):
        return batches.revoke(store, config, segment, note)


def set_override(folder: Path, parcel_id: str, value: float, reason: str, note: str | None = None) -> OverrideResult:
    """Set one parcel's market value over the model's, with a reason code from [overrides] reasons; the segment's
    batches become outdated until it is valued and decided again."""
    from reval.roll.overrides import set_override as set_value

    with open_project(folder, write=True) as (config, store):
        return set_value(store, config, parcel_id, value, reason, note)


def remove_override(folder: Path, parcel_id: str, note: str) -> OverrideResult:
    """Remove one parcel's override, with a note; the model's value applies again at the next value step."""
    from reval.roll.overrides import remove_override as remove

    with open_project(folder, write=True) as (_, store):
        return remove(store, parcel_id, note)


def correct_parcel(folder: Path, parcel_id: str, changes: list[str], note: str,
                   run_id: str | None = None) -> CorrectionResult:
    """Correct one parcel's characteristics (`feature=value` each) and revalue it with the run's stored models
    (no refit); the segment's batches become outdated until it is valued and decided again."""
    from reval.data.corrections import correct_parcel as correct

    with open_project(folder, write=True) as (config, store):
        return correct(store, config, parcel_id, changes, note, run_id)


def decision_refusal(folder: Path, segment: str, action: str) -> str | None:
    """Why `approve`, `hold` or `revoke` of the segment would be refused for its batch's state, or None (read-only:
    the app asks before it asks for a note)."""
    from reval.roll import batches

    with open_project(folder) as (_, store):
        return batches.refusal(store, segment, action)


def export_roll(folder: Path, path: Path, partial: bool = False, overwrite: bool = False) -> ExportResult:
    """Write the certified roll (and its manifest) to `path`; refuses while a segment is unapproved unless
    partial, refuses the project's own files, and an existing file unless overwrite."""
    from reval.roll import export

    with open_project(folder, write=True) as (config, store):
        return export.export_roll(store, config, path, partial, overwrite)


def existing_export_files(path: Path) -> list[Path]:
    """The files an export to `path` would replace (the roll and its manifest), so a front-end can ask first."""
    from reval.roll.export import manifest_path

    return [p for p in (path, manifest_path(path)) if p.exists()]


def event_log(folder: Path, segment: str | None = None) -> EventLog:
    """The audit log, oldest first, optionally for one segment."""
    with open_project(folder) as (_, store):
        rows = store.records("log_events", {"segment": segment})
    events: list[Event] = [{"event_id": r["event_id"], "event_time": r["event_time"], "who": r["who"], "kind": r["kind"],
                            "segment": r["segment"], "run_id": r["run_id"], "detail": json.loads(r["detail"] or "{}")}
                           for r in rows]
    return {"segment": segment, "events": events}


def batch_states(folder: Path) -> BatchStates:
    """Each segment's open batch (staged or held) and certified batch (approved or exported)."""
    from reval.roll.batch_states import segment_states
    from reval.stats.judging import judging_sha256

    with open_project(folder) as (config, store):
        return {"segments": segment_states(store, judging_sha256(config))}


# ---- the demo ----------------------------------------------------------------------------------------------------

def build_demo(folder: Path, n_parcels: int | None, progress: Progress | None = None) -> DemoSummary:
    """Build the demo municipality's project folder and run every step of the job up to staged values."""
    from reval.data.config import load_config

    folder.mkdir(parents=True, exist_ok=True)
    if n_parcels is None:
        for name in DEMO_FILES:
            shutil.copyfile(DEMO_SOURCE / name, folder / name)
    else:
        from data_samples.demo_town import write_project

        write_project(folder, n_parcels=n_parcels)
    imported = import_data(folder, progress)
    steps = ["import" + ("" if imported["changed"] else " (unchanged)")]
    sales = prepare_sales(folder, progress)
    steps.append(f"sales: {sales['qualified']:,} qualified, {sales['excluded']:,} excluded (with reasons)")
    steps += [f"market trend: {note}" for note in sales["trend_notes"]]
    checked = check_data(folder)
    steps.append(f"data check: {sum(checked['totals'].values()):,} rows to look at (reval check --csv FILE)")
    for by in ("market_area", "class", "all", "segment"):
        prior = study(folder, "prior", by)
    steps.append(_failing("ratio study of prior values", prior))
    run = fit(folder, progress)
    steps.append(f"fit: run {run['run_id']}, {run['segments']} segments, {run['parcels']:,} parcels valued")
    steps.append(_failing("out-of-fold ratio study of model values", study(folder, "model", "segment", run["run_id"])))
    staged = stage_values(folder)
    steps.append(f"values staged for review: {len(staged['staged'])} neighbourhood batches")
    config = load_config(folder)
    return {"jurisdiction": config.jurisdiction, "folder": str(config.folder), "parcels": imported["parcels"],
            "sales": imported["sales"], "segments": imported["segments"], "market_areas": imported["market_areas"],
            "steps": steps}


def _failing(what: str, result: StudyResult) -> str:
    failing = [g["group"] for g in result["groups"] if any(v["status"] == "fail" for v in g["verdicts"].values())]
    return f"{what}: {len(result['groups'])} neighbourhoods, {len(failing)} failing a standard"
