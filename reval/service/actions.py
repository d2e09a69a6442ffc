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
    from reval.service.types import (AllPassing, BatchStates, CompareResult, Decision, DemoSummary, Event, EventLog,
                                     ExportResult, FitSummary, ImportSummary, ReportResult, ReviewReport, SaleDecision,
                                     SalesCounts, StagePlan, StageResult, StudyResult)

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
    """The stored qualification counts."""
    from reval.data.sales import stored_summary

    with open_project(folder) as (_, store):
        return stored_summary(store).as_dict()


def segment_overview(folder: Path) -> list[Record]:
    """One row per segment with its parcel and sale counts."""
    with open_project(folder) as (_, store):
        return store.records("segment_counts")


# ---- studies and models --------------------------------------------------------------------------------------

def study(folder: Path, values: str = "prior", by: Grouping = "segment", run_id: str | None = None,
          in_sample: bool = False) -> StudyResult:
    """Run and store a ratio study; model values (the latest run unless named) are out-of-fold unless
    in_sample is asked for."""
    from reval.roll.valuation import resolve_run
    from reval.stats.study import run_study

    source: ValuesSource = "prior" if values == "prior" else "model_in_sample" if in_sample else "model_out_of_fold"
    with open_project(folder, write=True) as (config, store):
        run = None if source == "prior" else resolve_run(store, run_id)
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
    names, and the permutation importance of the references that store it, for a run."""
    from reval.model.names import named
    from reval.roll.valuation import resolve_run

    with open_project(folder) as (_, store):
        run = resolve_run(store, run_id)
        rows = named(store.records("reference_accuracy_rows", [run]), group="segment")
        importance = named(store.records("feature_importance_rows", [run]))
    return {"run_id": run, "models": list(dict.fromkeys(r["model"] for r in rows)),
            "model_names": {r["model"]: r["model_name"] for r in rows}, "rows": rows, "importance": importance}


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


def export_roll(folder: Path, path: Path, partial: bool = False, overwrite: bool = False) -> ExportResult:
    """Write the certified roll (and its manifest) to `path`; refuses while a segment is unapproved unless
    partial, refuses the project's own files, and an existing file unless overwrite."""
    from reval.roll import export

    with open_project(folder, write=True) as (config, store):
        return export.export_roll(store, config, path, partial, overwrite)


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
