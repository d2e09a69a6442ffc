"""The ratio-study report an oversight body receives: cover, summary, stratified tables, plots,
representativeness, the sales used, the model, the decisions - in the order a reviewer reads, as HTML or PDF.

Every statistic in its tables is read from the stored studies (reval.stats.stored); a grouping not studied with
these values since the sales last changed is studied first by the one study code (reval.stats.study.run_study)
and stored. The plots
read the same sales and studies; parcel-level plots use counts binned in SQL.
"""
from __future__ import annotations

import json
import time
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from reval.clock import utc_now
from reval.data.config import Config
from reval.data.events import current_user
from reval.data.sales import stored_summary
from reval.data.store import Store
from reval.errors import UserError
from reval.results import ReportResult
from reval.model.names import named
from reval.report import figures
from reval.report.document import Cell, Document, Num, Section, check_path, save
from reval.report.representativeness import CHI_SQUARE, MANN_WHITNEY, compare_features
from reval.service.wording import CAUTION
from reval.states import Grouping, ValuesSource
from reval.stats.ratio_stats import decile_median_cis, value_proxy
from reval.stats.sources import SOURCE_LABELS
from reval.stats.stored import STATS, StudyGroup, StudyResult, load_study, study_id
from reval.stats.study import available_groupings, run_study, sales_for_study

STRATA: tuple[tuple[Grouping, str], ...] = (
    ("market_area", "market area"), ("segment", "segment"), ("class", "property class"),
    ("value_range", "value range (quintiles of the value proxy)"), ("age", "age (decades of {age})"),
    ("size", "size (quintile bands of {size})"))   # {age}, {size}: the [study] features
CHANGE_BINS = 60
STAT_NAMES = {"median_ratio": "median ratio", "cod": "COD", "prd": "PRD", "prb": "PRB"}


def _studies(store: Store, config: Config, source: ValuesSource, run: str | None) -> tuple[dict[str, StudyResult], list[str]]:
    """Every grouping's stored study for these values; those never stored, or stored before the sales last
    changed (an import, the sales step, a decision on a sale), are studied and stored first."""
    out: dict[str, StudyResult] = {}
    studied: list[str] = []
    groupings: tuple[Grouping, ...] = ("all", *(g for g, _ in STRATA))
    changed = store.rows("report_sales_changed")[0][0]
    available = available_groupings(store, config)
    for grouping in groupings:
        if grouping not in available:
            continue
        header = store.records("study_header", [study_id(source, run, grouping)])
        if header and (changed is None or header[0]["created_at"] >= changed):
            out[grouping] = load_study(store, source, grouping, run)
        else:
            out[grouping] = run_study(store, config, source, grouping, run)
            studied.append(grouping)
    return out, studied


def _n(x: float | None, decimals: int) -> Num:
    return Num(x, "-" if x is None else f"{x:.{decimals}f}")


DECIMALS = {"median_ratio": 3, "cod": 1, "prd": 3, "prb": 3}


def _verdict_text(g: StudyGroup) -> str:
    """The verdicts in words: 'meets all' or the statistics that fail or are inconclusive."""
    statuses = {k: v["status"] for k, v in g["verdicts"].items()}
    if g["n"] == 0 or "no_sales" in statuses.values():
        return "no sales"
    if "too_few_sales" in statuses.values():
        return "too few sales"
    bad = [f"{STAT_NAMES.get(k, k)} {'FAILS' if s == 'fail' else 'inconclusive'}" for k, s in statuses.items()
           if s in ("fail", "inconclusive")]
    return "; ".join(bad) if bad else "meets all"


def _group_row(g: StudyGroup) -> list[Cell]:
    row: list[Cell] = [g["group"], Num(g["n"], str(g["n"])), Num(g["n_trimmed"], str(g["n_trimmed"]))]
    for stat in STATS:
        ci = g[f"{stat}_ci"]  # type: ignore[literal-required]
        d = DECIMALS[stat]
        row += [_n(g[stat], d), _n(ci[0], d), _n(ci[1], d)]  # type: ignore[literal-required]
        if stat == "median_ratio":
            row.append(_n(g["weighted_mean_ratio"], 3))
    return row + [_verdict_text(g)]


GROUP_COLUMNS = ["group", "n", "trimmed", "median", "lo", "hi", "wtd mean", "COD", "lo", "hi", "PRD", "lo", "hi",
                 "PRB", "lo", "hi", "verdict"]


def _cover(doc: Document, config: Config, store: Store, source: ValuesSource, run: str | None,
           studies: dict[str, StudyResult]) -> None:
    part = doc.section("Cover")
    rows: list[list[Cell]] = [["jurisdiction", config.jurisdiction], ["valuation date", str(config.valuation_date)],
                              ["values studied", SOURCE_LABELS[source]], ["run", run or "none (prior roll values)"]]
    if run:
        header = store.records("report_run", [run])[0]
        rows += [["run made", f"{header['created_at']:%Y-%m-%d %H:%M} UTC"], ["data hash (run)", header["data_sha256"]]]
    rows += [[f"input file: {f['role']}", f"{Path(f['path']).name} sha256 {f['sha256']}"] for f in store.records("dataset_files")]
    rows += [["config hash", config.sha256], ["written by", current_user()],
             ["written at", f"{utc_now():%Y-%m-%d %H:%M} UTC"]]
    part.table(["", ""], rows)
    part.paragraph(CAUTION + " This report documents a ratio study; the standards it judges against are those "
                   "configured for this project (IAAO Standard on Ratio Studies unless changed), and where local law "
                   "or the oversight body sets other rules, those apply.")
    if studies["all"].get("warning"):
        part.paragraph(studies["all"]["warning"])


def _summary(doc: Document, config: Config, studies: dict[str, StudyResult]) -> None:
    part = doc.section("Summary")
    g = studies["all"]["groups"][0]
    conf = studies["all"]["confidence"]
    part.paragraph(f"All {g['n']:,} qualified sales ({g['n_trimmed']} trimmed as ratio outliers, listed under "
                   f"'Sales used'). Confidence intervals at {conf:.0%}; verdicts by the configured standards "
                   f"({config.standards.verdict_rule} rule). Verdict: {_verdict_text(g)}.")
    rows: list[list[Cell]] = []
    for stat in STATS:
        ci = g[f"{stat}_ci"]  # type: ignore[literal-required]
        v = g["verdicts"].get(stat)
        d = DECIMALS[stat]
        rows.append([STAT_NAMES[stat], _n(g[stat], d), _n(ci[0], d), _n(ci[1], d),  # type: ignore[literal-required]
                     v["limit"] if v else "-", v["status"] if v else "-"])
    rows.insert(1, ["weighted mean ratio", _n(g["weighted_mean_ratio"], 3), None, None, "-", "-"])
    rows.insert(2, ["mean ratio", _n(g["mean_ratio"], 3), None, None, "-", "-"])
    part.table(["statistic", "value", "CI low", "CI high", "standard", "verdict"], rows,
               caption="Level, uniformity and vertical equity, all sales")


def _strata(doc: Document, config: Config, studies: dict[str, StudyResult]) -> None:
    part = doc.section("Stratified results")
    part.paragraph("Each table: one row per group (groups without sales included), n after trimming, the "
                   "statistics with their confidence intervals, and the verdict against the standards.")
    for grouping, words in STRATA:
        label = words.format(age=config.study.age_feature, size=config.study.size_feature)
        if grouping in studies:
            part.table(GROUP_COLUMNS, [_group_row(g) for g in studies[grouping]["groups"]], caption=f"By {label}")
        else:
            part.paragraph(f"By {label}: not studied (the feature it needs is not declared; see [study]).")


def _plots(doc: Document, config: Config, store: Store, source: ValuesSource, run: str | None, model_run: str | None,
           studies: dict[str, StudyResult]) -> None:
    part = doc.section("Plots")
    bounds = config.standards.median_ratio
    sales = sales_for_study(store, source, run)
    trimmed = {t["sale_id"] for t in studies["all"]["groups"][0].get("trimmed", [])}
    kept = sales[~sales["sale_id"].isin(trimmed)]
    v, p = kept["value"].to_numpy(float), kept["price"].to_numpy(float)
    r = v / p
    proxy = value_proxy(v, p, float(np.median(r))) if r.size else r
    fig, drawn = figures.ratio_scatter(proxy, r, bounds, config.study.seed)
    sampled = f"a seeded sample of {drawn:,} of {r.size:,} sales" if drawn < r.size else f"all {r.size:,} sales"
    part.figure(fig, f"Ratio against the value proxy (log scale), {sampled} (trimmed outliers left out); dashed: "
                     f"the level standard {bounds[0]:.2f}-{bounds[1]:.2f}.")
    ratios = sales["value"].to_numpy(float) / sales["price"].to_numpy(float)
    by_segment = pd.Series(ratios, index=sales.index).groupby(sales["segment"].astype(str))
    part.figure(figures.ratio_boxes([(str(k), s.to_numpy()) for k, s in by_segment], bounds, "segment"),
                "Ratios by segment, every qualified sale untrimmed (box: quartiles and median; whiskers: 1.5 IQR; "
                "points beyond them not drawn); dashed: the level standard.")
    if r.size:
        cis = decile_median_cis(r, proxy, studies["all"]["confidence"])
        part.figure(figures.decile_medians(cis[:, 0], cis[:, 1], cis[:, 2], bounds),
                    "Median ratio by decile of the value proxy with its confidence interval (the stored study's "
                    "decile medians); a falling line means high-value parcels are under-assessed.")
    segments = studies["segment"]["groups"]
    limits = [_limit(g) for g in segments]
    part.figure(figures.cod_by_group(segments, limits), "COD by segment with its bootstrap confidence interval.")
    trend = store.frame("report_market_trend")
    if not trend.empty:
        part.figure(figures.market_trend(trend), "The market trend each area's sales were time-adjusted by, "
                                                 "with its band.")
    if model_run is None:
        part.paragraph("No model run yet: the value-change histogram and the model's curves appear after `reval fit`.")
        return
    bins = store.frame("value_change_bins", [model_run, None, CHANGE_BINS, 0.01])
    if not bins.empty:
        part.figure(figures.change_histogram(bins, CHANGE_BINS),
                    f"Value change from the prior roll to run {model_run}'s market values, sold and unsold parcels "
                    f"(counted in {CHANGE_BINS} bins in the database, every parcel with a prior value).")
    curves = store.frame("report_curves", [model_run])
    if not curves.empty:
        part.figure(figures.curves(curves), f"The model's curves in run {model_run}: one panel per feature, one "
                                            "line per segment (dashed: its parent's curve).")


def _limit(g: StudyGroup) -> float | None:
    verdict = g["verdicts"].get("cod")
    try:
        return float(verdict["limit"].lstrip("<= ").strip()) if verdict else None
    except ValueError:
        return None


def _representativeness(doc: Document, config: Config, store: Store) -> None:
    part = doc.section("Representativeness")
    part.paragraph("Do the sold parcels resemble all parcels? Per segment and feature: parcels, sold parcels (a "
                   "qualified sale), the mean of all and of the sold (ordered features; level codes for ordinal "
                   f"ones), and a two-sample test of sold against unsold parcels: {MANN_WHITNEY} for ordered "
                   f"features, {CHI_SQUARE} for categorical ones. A small p-value says the sold parcels differ.")
    features = [(int(r["position"]), r["name"], r["kind"]) for r in store.records("feature_list")]
    rows: list[list[Cell]] = []
    for c in compare_features(store.frame("report_feature_counts"), features):
        rows.append([c["segment"], c["feature"], c["n_all"], c["n_sold"], _n(c["mean_all"], 2), _n(c["mean_sold"], 2),
                     "chi-square" if c["test"] == CHI_SQUARE else "Mann-Whitney U", _n(c["statistic"], 1),
                     _n(c["p_value"], 4)])
    part.table(["segment", "feature", "parcels", "sold", "mean all", "mean sold", "test", "statistic", "p-value"], rows)


def _sales_used(doc: Document, store: Store, config: Config, studies: dict[str, StudyResult]) -> None:
    part = doc.section("Sales used")
    counts = stored_summary(store, config).as_dict()
    rows: list[list[Cell]] = [["qualified", counts["qualified"]]]
    rows += [[f"excluded: {reason}", n] for reason, n in sorted(counts["excluded_by_reason"].items())]
    part.table(["sales", "n"], rows, caption="Qualification")
    decisions = store.records("report_sale_decisions")
    part.table(["sale", "decision", "reason", "when", "who"],
               [[d["sale_id"], d["decision"], d["reason"], f"{d['decided_at']:%Y-%m-%d %H:%M}", d["who"]] for d in decisions],
               caption=f"The analyst's decisions on single sales ({len(decisions)})")
    cut = [(g["group"], t) for g in studies["segment"]["groups"] for t in g.get("trimmed", [])]
    k = studies["segment"]["trim_iqr_k"]
    part.table(["segment", "sale", "parcel", "ratio"], [[grp, t["sale_id"], t["parcel_id"], _n(t["ratio"], 3)] for grp, t in cut],
               caption=f"Ratio outliers trimmed from the study by segment ({len(cut)}; outside Q1 - k IQR .. Q3 + k IQR, "
                       f"k = {k})" if k else "No ratio outliers trimmed (trimming is off)")
    _chasing(part, store, config)


def _chasing(part: Section, store: Store, config: Config) -> None:
    from reval.roll.review import review

    try:
        report = review(store, config)
    except UserError:
        part.paragraph("Sales-chasing check: no values staged yet (`reval value`).")
        return
    rows: list[list[Cell]] = []
    for s in report["segments"]:
        c = s["sales_chasing"]
        rows.append([s["segment"], s["state"], c["n_sold"], c["n_unsold"], _n(c["median_change_sold"], 3),
                     _n(c["median_change_unsold"], 3), _n(c["p_value"], 4), _n(c["roll_cod"], 1), _n(c["oof_cod"], 1)])
    part.table(["segment", "batch", "sold", "unsold", "change sold", "change unsold", "p (Mann-Whitney)", "roll COD",
                "out-of-fold COD"], rows,
               caption=f"Sales-chasing check (reval review): sold vs unsold value changes; a roll COD below "
                       f"{config.standards.cod_min} on the sales is a warning sign")


def _model(doc: Document, store: Store, config: Config, run: str | None) -> None:
    part = doc.section("The model")
    if run is None:
        part.paragraph("No model run yet.")
        return
    header = store.records("report_run", [run])[0]
    part.paragraph(f"Run {run}: a generalized additive model of log price per segment (penalised regression "
                   f"splines), pooled jurisdiction -> market area -> segment. Out-of-fold procedure: the sales are "
                   f"split into {header['folds']} folds (seed {header['seed']}); each sale is valued by the model fit "
                   f"without its fold, the market trend re-estimated on that fold's training sales; the reference "
                   f"models below are scored on the same sales and folds, untrimmed.")
    part.table(["feature", "type", "log", "shape rule", "levels"],
               [[f.name, f.kind, "yes" if f.log else "no", f.shape, ", ".join(f.levels)] for f in config.features],
               caption="Features and shape rules")
    settings = json.loads(header["settings"]) if isinstance(header["settings"], str) else header["settings"]
    part.table(["setting", "value"], [[k, json.dumps(v)] for k, v in sorted(settings.items())], caption="[model] settings")
    models = store.records("report_segment_models", [run])
    part.table(["segment", "market area", "model", "why", "sales", "borrowed", "interactions"],
               [[m["segment"], m["market_area"], m["kind"], m["reason"] or "", m["n_sales"], _n(m["borrowed_share"], 2),
                 ", ".join("x".join(pair) if isinstance(pair, list) else str(pair) for pair in _json(m["interactions"]))]
                for m in models], caption="Pooling and interactions per segment")
    accuracy = named(store.records("reference_accuracy_rows", [run]), group="segment")
    overall = [a for a in accuracy if a.get("segment") == "(all)"] or accuracy
    part.table(["model", "sales", "COD", "median ratio", "PRD", "RMSE (log)"],
               [[a["model_name"], a["n"], _n(a["cod"], 2), _n(a["median_ratio"], 3), _n(a["prd"], 3), _n(a["rmse_log"], 4)]
                for a in overall], caption="Out-of-fold accuracy: our model and the reference models, same folds")


def _json(value: Any) -> list[Any]:
    return json.loads(value) if isinstance(value, str) else list(value or [])


def _decisions(doc: Document, store: Store) -> None:
    part = doc.section("Decisions")
    events = store.records("report_decision_events")
    rows: list[list[Cell]] = []
    for e in events:
        d = _detail(e["detail"])
        override = "yes" if d.get("override") else ""
        rows.append([f"{e['event_time']:%Y-%m-%d %H:%M}", e["who"], e["kind"].replace("_", " "), e["segment"] or "",
                     override, str(d.get("note") or "")])
    part.table(["when (UTC)", "who", "decision", "segment", "override", "note"], rows,
               caption=f"From the audit log ({len(rows)} decisions)")


def _detail(value: Any) -> dict[str, Any]:
    return json.loads(value) if isinstance(value, str) else dict(value or {})


def build_report(store: Store, config: Config, source: ValuesSource, run: str | None,
                 model_run: str | None) -> tuple[Document, list[str]]:
    """The report's document for the study of `source` values (`run` for model values); `model_run` is the run
    whose model and value changes are documented (None: no run yet). Also the groupings studied first."""
    studies, studied = _studies(store, config, source, run)
    doc = Document(f"Ratio study: {config.jurisdiction}",
                   subtitle=f"valuation date {config.valuation_date} - {SOURCE_LABELS[source]}")
    _cover(doc, config, store, source, run, studies)
    _summary(doc, config, studies)
    _strata(doc, config, studies)
    _plots(doc, config, store, source, run, model_run, studies)
    _representativeness(doc, config, store)
    _sales_used(doc, store, config, studies)
    _model(doc, store, config, model_run)
    _decisions(doc, store)
    return doc, studied


def write_report(store: Store, config: Config, out: Path, source: ValuesSource, run: str | None,
                 model_run: str | None) -> ReportResult:
    """Write the report to `out` (.html or .pdf; a partial file is renamed into place only when complete)."""
    check_path(out)
    start = time.perf_counter()
    doc, studied = build_report(store, config, source, run, model_run)
    save(doc, out)
    return {"path": str(out), "values": SOURCE_LABELS[source], "run_id": run, "figures": doc.figure_count(),
            "studied": studied, "seconds": round(time.perf_counter() - start, 2)}
