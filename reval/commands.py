"""The service API shared by the command line and the terminal app: one function per user-level step."""
from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any, Callable

from .config import CONFIG_NAME, Config, load_config
from .errors import UserError
from .importer import ImportResult, run_import
from .sales import SalesSummary, prepare_sales
from .starter import starter_config
from .store import open_store
from .study import run_study
from .valuation import resolve_run
from .fitting import fit_run
from .cli_roll import value_step

Progress = Callable[[str, int, int], None]
DEMO_SOURCE = Path(__file__).resolve().parent.parent / "data_samples" / "demo"
DEMO_FILES = ("reval.toml", "parcels.csv", "sales.csv", "land_schedule.csv")


def init_project(folder: Path, name: str) -> Path:
    """Create a project folder with a commented starter reval.toml; never overwrite one."""
    path = folder / CONFIG_NAME
    if path.exists():
        raise UserError(f"{path} already exists; reval init never overwrites a config")
    folder.mkdir(parents=True, exist_ok=True)
    path.write_text(starter_config(name), encoding="utf-8")
    return path


def import_project(folder: Path, progress: Progress | None = None) -> ImportResult:
    """Load the project's input files (all or nothing)."""
    return run_import(load_config(folder), progress)


def build_demo(folder: Path, n_parcels: int | None, progress: Progress | None = None) -> dict[str, Any]:
    """Build the demo municipality's project folder and run every step of the job."""
    folder.mkdir(parents=True, exist_ok=True)
    if n_parcels is None:
        for name in DEMO_FILES:
            shutil.copyfile(DEMO_SOURCE / name, folder / name)
    else:
        from data_samples.demo_town import write_project

        write_project(folder, n_parcels=n_parcels)
    config = load_config(folder)
    result = run_import(config, progress)
    steps = ["import" + ("" if result.changed else " (unchanged)")]
    with open_store(config.database) as store:
        sales = prepare_sales(store, config, progress).as_dict()
        steps.append(f"sales: {sales['qualified']:,} qualified, {sales['excluded']:,} excluded (with reasons)")
        for by in ("segment", "market_area", "class", "all"):
            run_study(store, config, "prior", by)  # type: ignore[arg-type]
        steps.append(_failing("ratio study of prior values", run_study(store, config, "prior", "segment")))
        run = fit_run(store, config, progress)
        steps.append(f"fit: run {run['run_id']}, {run['segments']} segments, {run['parcels']:,} parcels valued")
        steps.append(_failing("out-of-fold ratio study of model values",
                              run_study(store, config, "model_out_of_fold", "segment", run["run_id"])))
    staged = value_step(folder)
    steps.append(f"values staged for review: {len(staged['staged'])} neighbourhood batches")
    return _summary(config, result, steps)


def _failing(what: str, study: dict[str, Any]) -> str:
    failing = [g["group"] for g in study["groups"] if any(v["status"] == "fail" for v in g["verdicts"].values())]
    return f"{what}: {len(study['groups'])} neighbourhoods, {len(failing)} failing a standard"


def _summary(config: Config, result: ImportResult, steps: list[str]) -> dict[str, Any]:
    return {"jurisdiction": config.jurisdiction, "folder": str(config.folder), "parcels": result.parcels,
            "sales": result.sales, "segments": result.segments, "market_areas": result.market_areas,
            "steps": steps}


def segment_overview(folder: Path) -> list[dict[str, Any]]:
    """One row per segment with its parcel and sale counts (read-only)."""
    config = load_config(folder)
    with open_store(config.database, read_only=True) as store:
        return store.frame("segment_counts").to_dict("records")


def prepare_sales_step(folder: Path, progress: Progress | None = None) -> dict[str, Any]:
    """Qualify sales and time-adjust them to the valuation date."""
    config = load_config(folder)
    with open_store(config.database) as store:
        return prepare_sales(store, config, progress).as_dict()


def sales_report(folder: Path) -> dict[str, Any]:
    """The stored qualification counts (read-only)."""
    config = load_config(folder)
    with open_store(config.database, read_only=True) as store:
        return SalesSummary(store.frame("sales_counts")).as_dict()


def study_step(folder: Path, values: str = "prior", by: str = "segment", run_id: str | None = None,
               in_sample: bool = False) -> dict[str, Any]:
    """Run and store a ratio study; model values (the latest run unless named) are out-of-fold unless
    in_sample is asked for."""
    config = load_config(folder)
    source = "prior" if values == "prior" else "model_in_sample" if in_sample else "model_out_of_fold"
    with open_store(config.database) as store:
        run = None if source == "prior" else resolve_run(store, run_id)
        return run_study(store, config, source, by, run)  # type: ignore[arg-type]


def fit_step(folder: Path, progress: Progress | None = None, jobs: int | None = None) -> dict[str, Any]:
    """Fit every segment's model, validate out of fold, compare with the reference models, store a run."""
    config = load_config(folder)
    with open_store(config.database) as store:
        return fit_run(store, config, progress, jobs)


def compare_report(folder: Path, run_id: str | None = None) -> dict[str, Any]:
    """The reference models' accuracy beside ours, per segment and overall, for a run (read-only)."""
    config = load_config(folder)
    with open_store(config.database, read_only=True) as store:
        run = resolve_run(store, run_id)
        table = store.frame("reference_accuracy_rows", [run])
        importance = store.frame("feature_importance_rows", [run])
    rows = table.astype(object).where(table.notna(), None).to_dict("records")
    return {"run_id": run, "models": sorted(set(table["model"])), "rows": rows,
            "gradient_boosting_importance": importance.to_dict("records")}
