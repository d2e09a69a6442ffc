"""`reval fit`: one run = the valuation model for every segment, honest out-of-fold predictions, the
reference models on the same folds, and every parcel's estimate with its contributions — all stored in
DuckDB in one transaction so the app and the exports never refit anything."""
from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import json
import time
from importlib import metadata
from typing import Callable

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

from reval.data.config import Config, FeatureSpec
from reval.model.workers import fit_workers
from reval.data.dataset import SalesData, all_parcels, qualified_sales, with_shapes
from reval.data.sales import trend_factors
from reval.errors import UserError
from reval.data.events import record_event
from reval.data.fingerprint import record_fingerprints
from reval.model import BASE_TERM
from reval.model.hierarchy import FittedHierarchy, fit_hierarchy, fold_ids, out_of_fold
from reval.model import stored
from reval.model.settings import ModelSettings
from reval.model.comparison import (ALL_SEGMENTS, accuracy_table, compare_models, permutation_importance,
                                    reference_factories)
from reval.model.reference import baselines, reference_parcels
from reval.model.names import IMPORTANCE_MODELS, OURS, OURS_NO_INTERACTIONS, named
from reval.data.store import Store
from reval.plain import records
from reval.stats.study import BANDED_GROUPINGS, available_groupings, run_study
from reval.results import FitSummary

Progress = Callable[[str, int, int], None]
LIBRARIES = ("numpy", "scipy", "pandas", "scikit-learn", "statsmodels", "pygam", "duckdb", "joblib")


def _versions() -> dict[str, str]:
    return {name: metadata.version(name) for name in LIBRARIES}


def _data_hash(sales: SalesData, y: np.ndarray) -> str:
    digest = hashlib.sha256()
    for part in (np.ascontiguousarray(sales.X), y, sales.frame["segment"].to_numpy(str).astype("U"),
                 sales.frame["market_area"].to_numpy(str).astype("U"), sales.frame["vouched"].to_numpy(bool)):
        digest.update(np.ascontiguousarray(part).tobytes())
    return digest.hexdigest()


def _step(progress: Progress | None, name: str) -> Callable[[int, int], None] | None:
    return None if progress is None else (lambda done, total: progress(name, done, total))


def fit_run(store: Store, config: Config, progress: Progress | None = None, jobs: int | None = None,
            references: bool = True, scheduler: str | None = None) -> FitSummary:
    """Fit, validate out of fold, compare, value every parcel and store the run; returns its summary. Segment
    and fold fits run on `jobs` local processes, or on the Dask cluster at `scheduler` (reval/model/workers.py);
    this process alone writes the store."""
    settings: ModelSettings = config.model if jobs is None else dataclasses.replace(config.model, jobs=jobs)
    if scheduler is not None:
        settings = dataclasses.replace(settings, scheduler=scheduler)
    qualified = qualified_sales(store)
    if len(qualified.frame) == 0 or qualified.frame["adjusted_price"].isna().any():
        raise UserError("No prepared sales: run `reval sales` before `reval fit`.")
    in_fit = qualified.in_fit(config.sales.multi_parcel_in_fit)
    if not in_fit.any():
        raise UserError("Every qualified sale covers several parcels; set [sales] multi_parcel_in_fit = true to fit "
                        "them at their share of the package price.")
    sales = qualified.rows(in_fit)
    y = np.log(sales.fit_price("adjusted_price"))
    segment = sales.frame["segment"].to_numpy(str)
    market_area = sales.frame["market_area"].to_numpy(str)
    roll_segments = dict(store.rows("segment_market_areas"))
    features = with_shapes(sales.features, config.features)
    trusted = sales.frame["vouched"].to_numpy(bool)
    timings: dict[str, float] = {}

    start = time.perf_counter()
    folds = fold_ids(len(y), segment, settings.seed, settings.folds)
    targets = fold_targets(config, sales, folds)
    timings["fold_trends"] = time.perf_counter() - start

    with fit_workers(settings.scheduler):
        start = time.perf_counter()
        model = fit_hierarchy(sales.X, y, segment, market_area, features, settings, segments=roll_segments,
                              trusted=trusted, progress=_step(progress, "fitting segments"))
        timings["fit"] = time.perf_counter() - start
        start = time.perf_counter()
        oof = out_of_fold(sales.X, y, segment, market_area, features, settings, trusted=trusted,
                          fold_targets=targets, progress=_step(progress, "out-of-fold folds"))
        timings["out_of_fold"] = time.perf_counter() - start
    with threadpool_limits(limits=1):  # OpenMP/BLAS threads thrash on small fits; measured 7x slower on 2 cores
        accuracy, importance = (_references(sales, features, y, trusted, settings, folds, oof, targets, timings,
                                            progress)
                                if references else (pd.DataFrame(), pd.DataFrame()))

    start = time.perf_counter()
    parcels, X_all = all_parcels(store, features)
    typical = reference_parcels(X_all, parcels["segment"].to_numpy(str), features, baselines(config.features))
    estimates, contributions = value_parcels(model, parcels, X_all, typical.rows)
    timings["value_parcels"] = time.perf_counter() - start

    run_id = "run-" + dt.datetime.now().strftime("%Y%m%d-%H%M%S-%f")
    header = pd.DataFrame([{
        "run_id": run_id, "created_at": dt.datetime.now(), "config_sha256": config.sha256,
        "data_sha256": _data_hash(sales, y), "seed": settings.seed, "folds": settings.folds,
        "settings": json.dumps(dataclasses.asdict(settings), default=list), "library_versions": json.dumps(_versions()),
        "timings": json.dumps(timings)}])
    reports = _segment_reports(model, parcels, X_all, run_id)
    fills = _filled_in(model, config, parcels, X_all)
    sale_predictions = pd.concat([_predictions(run_id, sales, model, folds, oof),
                                  _predictions(run_id, qualified.rows(~in_fit), model)], ignore_index=True)
    weights = _sale_weights(model, sales, y - sale_predictions["insample_log"].to_numpy()[: len(y)], run_id)
    with store.transaction() as con:
        store.insert("insert_runs", header)
        store.run("insert_run_model", [run_id, *stored.encode(model)])
        for table, frame in reports.items():
            store.insert(f"insert_{table}", frame)
        store.insert("insert_sale_predictions", sale_predictions)
        store.insert("insert_sale_weights", weights)
        store.insert("insert_parcel_estimates", estimates.assign(run_id=run_id))
        record_fingerprints(store, run_id)
        store.insert("insert_parcel_contributions", contributions.assign(run_id=run_id))
        store.insert("insert_segment_references", typical.table.assign(run_id=run_id))
        store.insert("insert_reference_accuracy", accuracy.assign(run_id=run_id))
        store.insert("insert_feature_importance", importance.assign(run_id=run_id))
        store.insert("insert_run_features", fills.assign(run_id=run_id))
        store.insert("insert_run_structure", structure_frame(model, run_id))
        downweighted = int((weights["weight"] < 1).sum())
        record_event(con, "fit", {"sales": len(y), "parcels": len(parcels), "timings": timings,
                                  "downweighted_sales": downweighted, "config_sha256": config.sha256}, run_id=run_id)
        for by in available_groupings(store, config):
            run_study(store, config, "model_out_of_fold", by, run_id)
            if by not in BANDED_GROUPINGS:   # in-sample banded studies on demand: each costs a study of all sales
                run_study(store, config, "model_in_sample", by, run_id)
    overall = accuracy[accuracy["segment"] == ALL_SEGMENTS] if len(accuracy) else accuracy
    return {"run_id": run_id, "sales": int(len(y)), "parcels": int(len(parcels)),
            "segments": len(reports["segment_models"]), "timings": timings, "downweighted_sales": downweighted,
            "accuracy": named(records(overall.drop(columns=["segment"], errors="ignore"))),
            "filled_in": {str(r.feature): {"parcels": int(r.n_filled), "value": fill_text(features[int(r.position)],
                                                                                          float(r.fill_value))}
                          for r in fills.itertuples()}}


def structure_frame(model: FittedHierarchy, run_id: str) -> pd.DataFrame:
    """The structure the model chose by evidence, one row per candidate and criterion (run_structure); a criterion
    that cannot be computed (no residual degrees of freedom) is stored as missing."""
    rows = [dataclasses.asdict(c) for c in model.choices]
    frame = pd.DataFrame(rows, columns=["step", "choice", "candidate", "criterion", "value", "chosen"])
    frame["value"] = frame["value"].astype(float).where(np.isfinite(frame["value"].astype(float)))
    return frame.assign(run_id=run_id)


def fill_text(feature: FeatureSpec, value: float) -> str:
    """A filled-in value as people read it: the level's name, or the number."""
    if feature.kind in ("ordinal", "categorical") and 0 <= value < len(feature.levels):
        return feature.levels[int(value)]
    return f"{value:,.4g}"


def _filled_in(model: FittedHierarchy, config: Config, parcels: pd.DataFrame, X: np.ndarray) -> pd.DataFrame:
    """Per feature: the value the model takes where a parcel lacks one (the typical value of the sales it was fitted
    on) and how many parcels of the classes the model values lack it (reval/roll/flags.py flags each of them)."""
    valued = parcels["property_class"].map(config.classes.rule).to_numpy() == "model"
    return pd.DataFrame({"feature": [t.name for t in model.spec.transforms],
                         "position": np.arange(len(model.spec.transforms), dtype=np.int16),
                         "fill_value": [t.impute for t in model.spec.transforms],
                         "n_filled": np.isnan(X[valued]).sum(axis=0).astype(np.int64)})


def fold_targets(config: Config, sales: SalesData, folds: np.ndarray) -> dict[int, np.ndarray]:
    """Per fold: the log prices adjusted by the market trend of the fold's training sales alone, so no
    held-out sale informs the adjustment its own ratio is judged by (the whole procedure per fold)."""
    targets = {}
    for k in np.unique(folds):
        factor, _ = trend_factors(config, sales, folds != k)
        targets[int(k)] = np.log(sales.fit_price("sale_price") * factor)
    return targets


def _predictions(run_id: str, sales: SalesData, model: FittedHierarchy, folds: np.ndarray | None = None,
                 oof: np.ndarray | None = None) -> pd.DataFrame:
    """Each sale's in-sample and out-of-fold log value. Sales left out of the fit (multi-parcel packages) get
    fold -1 and the full model's value twice: no model saw them."""
    segment, market_area = sales.frame["segment"].to_numpy(str), sales.frame["market_area"].to_numpy(str)
    insample = model.predict(sales.X, segment, market_area) if len(sales.frame) else np.empty(0)
    return pd.DataFrame({"run_id": run_id, "sale_id": sales.frame["sale_id"], "parcel_id": sales.frame["parcel_id"],
                         "fold": (np.full(len(insample), -1) if folds is None else folds).astype(np.int16),
                         "insample_log": insample, "oof_log": insample if oof is None else oof})


def _references(sales: SalesData, features: tuple[FeatureSpec, ...], y: np.ndarray, trusted: np.ndarray,
                settings: ModelSettings, folds: np.ndarray, oof: np.ndarray, fold_targets: dict[int, np.ndarray],
                timings: dict[str, float], progress: Progress | None) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The reference models and the additive model without interactions, on the same folds and the same
    per-fold time adjustment."""
    start = time.perf_counter()
    segment = sales.frame["segment"].to_numpy(str)
    plain = out_of_fold(sales.X, y, segment, sales.frame["market_area"].to_numpy(str), features,
                        dataclasses.replace(settings, interaction_rule="none"), trusted=trusted,
                        fold_targets=fold_targets)
    plain_seconds = time.perf_counter() - start
    if progress:
        progress("reference models", 1, 2)
    factories = reference_factories(sales.features, seed=settings.seed)
    predictions, seconds = compare_models(factories, sales.X, y, segment, folds, fold_targets)
    predictions = {OURS: oof, OURS_NO_INTERACTIONS: plain, **predictions}
    seconds = {OURS: timings["out_of_fold"], OURS_NO_INTERACTIONS: plain_seconds, **seconds}
    table = accuracy_table(y, predictions, segment, seconds, seed=settings.seed)
    importance = pd.concat([
        permutation_importance(factories[name]().fit(sales.X, y, segment), sales.X, y, segment, seed=settings.seed)
        .assign(model=name) for name in IMPORTANCE_MODELS], ignore_index=True)
    timings["references"] = time.perf_counter() - start
    if progress:
        progress("reference models", 2, 2)
    accuracy = table.rename(columns={"cv_seconds": "seconds"})[
        ["model", "segment", "n", "rmse_log", "median_ratio", "cod", "prd", "prb", "seconds"]]
    return accuracy, importance


def _sale_weights(model: FittedHierarchy, sales: SalesData, residual: np.ndarray, run_id: str) -> pd.DataFrame:
    """Each sale's weight in the fit and its residual against the run's value (log), for insert_sale_weights
    (which writes the reasons). The weight was judged on the screening model's leave-one-out residual, which
    overstates a lone sale's distance where that model extrapolates; the run's own value is what a reviewer
    compares the price with."""
    found = model.sale_weights
    weight = np.ones(len(sales.frame)) if found is None else found.weight
    return pd.DataFrame({"run_id": run_id, "sale_id": sales.frame["sale_id"], "parcel_id": sales.frame["parcel_id"],
                         "weight": weight, "residual": residual, "vouched": sales.frame["vouched"].to_numpy(bool),
                         "analyst_reason": sales.frame["analyst_reason"]})


def value_parcels(model: FittedHierarchy, parcels: pd.DataFrame, X: np.ndarray,
                   reference: np.ndarray) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Every parcel's log value and its exact additive contributions measured from its segment's reference parcel
    (long form; the base is the reference parcel's log value)."""
    segment = parcels["segment"].to_numpy(str)
    market_area = parcels["market_area"].to_numpy(str)
    intercept, terms = model.contributions(X, segment, market_area, reference)
    log_value = intercept + np.sum(list(terms.values()), axis=0)
    estimates = pd.DataFrame({"parcel_id": parcels["parcel_id"], "segment": segment, "log_value": log_value,
                              "market_value": np.exp(log_value)})
    names = [BASE_TERM, *terms]
    stacked = np.column_stack([intercept, *terms.values()])
    contributions = pd.DataFrame({"parcel_id": np.repeat(parcels["parcel_id"].to_numpy(), len(names)),
                                  "term": np.tile(np.array(names, dtype=object), len(parcels)),
                                  "contribution": stacked.ravel()})
    return estimates, contributions


def _segment_reports(model: FittedHierarchy, parcels: pd.DataFrame, X: np.ndarray, run_id: str) -> dict[str, pd.DataFrame]:
    """Per segment: how it was modelled, its curves, interactions and marginal effects."""
    summaries, curves, interactions, effects = [], [], [], []
    by_segment = pd.Series(np.arange(len(parcels))).groupby(parcels["segment"].to_numpy()).indices
    for name in sorted(model.segments):
        s = model.summary(name)
        summaries.append({"run_id": run_id, "segment": name, "market_area": s["market_area"], "kind": s["kind"],
                          "reason": s["reason"] or None, "n_sales": s["n_sales"],
                          "edf_deviation": s["edf_deviation"], "borrowed_share": s["borrowed_share"],
                          "interactions": json.dumps(s["interactions"]),
                          "detail": json.dumps({"lambdas": s["lambdas"],
                                                "deviation_columns": s["deviation_columns"]})})
        for f in model.features:
            curves.append(model.curves(name, f.name).assign(run_id=run_id, segment=name, feature=f.name))
        interactions.append(model.interactions(name).assign(run_id=run_id, segment=name))
        rows = by_segment.get(name)
        if rows is not None and len(rows):
            effects.append(model.marginal_effects(name, X[rows]).assign(run_id=run_id, segment=name))
    return {"segment_models": pd.DataFrame(summaries), "model_curves": pd.concat(curves, ignore_index=True),
            "model_interactions": pd.concat(interactions, ignore_index=True),
            "marginal_effects": pd.concat(effects, ignore_index=True) if effects else pd.DataFrame()}
