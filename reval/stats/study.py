"""Ratio studies per group, stored so the app reads them without recomputing.

The statistics are reval.ratio_stats (one implementation); this module groups sales, judges each group
against the standards, labels what the values were, and stores and reads the results.
"""
from __future__ import annotations

import datetime as dt
import json
from typing import Any, Literal

import pandas as pd

from reval.data.config import Config
from reval.errors import UserError
from reval.stats.ratio_stats import RatioStudy, ratio_study
from reval.stats.standards import judge
from reval.data.store import Store
from reval.plain import number
from reval.stats.sources import IN_SAMPLE_WARNING, SOURCE_LABELS

Grouping = Literal["segment", "market_area", "class", "all"]
GROUP_COLUMNS: dict[str, str | None] = {"segment": "segment", "market_area": "market_area",
                                        "class": "property_class", "all": None}


def study_id(values_source: str, run_id: str | None, grouping: str) -> str:
    return f"{values_source}/{run_id or '-'}/{grouping}"


def sales_for_study(store: Store, values_source: str, run_id: str | None) -> pd.DataFrame:
    """Sales with columns sale_id, parcel_id, price (time-adjusted), value, segment, market_area, property_class."""
    if store.rows("count_adjusted_sales")[0][0] == 0:
        raise UserError("No prepared sales yet: run `reval sales` first.")
    if values_source == "prior":
        return store.frame("study_sales_prior")
    column = "oof_value" if values_source == "model_out_of_fold" else "insample_value"
    frame = store.frame("study_sales_model", [run_id])
    return frame.assign(value=frame[column]).drop(columns=["oof_value", "insample_value"])


def _group_class(frame: pd.DataFrame) -> str | None:
    """The property class whose COD limit applies: the group's own, or its most common one."""
    if frame.empty:
        return None
    return str(frame["property_class"].mode().sort_values().iloc[0])


def _group_row(sid: str, name: str, cls: str | None, s: RatioStudy, verdicts: dict[str, Any]) -> dict[str, Any]:
    return {"study_id": sid, "group_name": name, "property_class": cls, "n": s.n, "n_trimmed": s.n_trimmed,
            "median_ratio": s.median_ratio, "median_lo": s.median_ratio_ci[0], "median_hi": s.median_ratio_ci[1],
            "mean_ratio": s.mean_ratio, "weighted_mean_ratio": s.weighted_mean_ratio,
            "cod": s.cod, "cod_lo": s.cod_ci[0], "cod_hi": s.cod_ci[1],
            "prd": s.prd, "prd_lo": s.prd_ci[0], "prd_hi": s.prd_ci[1],
            "prb": s.prb, "prb_lo": s.prb_ci[0], "prb_hi": s.prb_ci[1],
            "decile_medians": [number(v) for v in s.decile_median_ratios],
            "verdicts": json.dumps({k: {"status": v.status, "limit": v.limit, "value": number(v.value)}
                                    for k, v in verdicts.items()})}


def run_study(store: Store, config: Config, values_source: str = "prior", grouping: Grouping = "segment",
              run_id: str | None = None) -> dict[str, Any]:
    """Compute, store (replacing the same study) and return a ratio study."""
    sales = sales_for_study(store, values_source, run_id)
    column = GROUP_COLUMNS[grouping]
    groups = [("all", sales)] if column is None else list(sales.groupby(column, sort=True))
    sid = study_id(values_source, run_id, grouping)
    opts = config.study
    rows, trimmed = [], []
    for name, frame in groups:
        s = ratio_study(frame["value"].to_numpy(float), frame["price"].to_numpy(float), confidence=opts.confidence,
                        n_boot=opts.bootstrap, seed=opts.seed, trim_iqr_k=opts.trim_iqr_k)
        cls = _group_class(frame)
        rows.append(_group_row(sid, str(name), cls, s, judge(s, config.standards, cls)))
        cut = frame.loc[s.trimmed]
        trimmed.append(pd.DataFrame({"study_id": sid, "group_name": str(name), "sale_id": cut["sale_id"],
                                     "parcel_id": cut["parcel_id"], "ratio": cut["value"] / cut["price"]}))
    groups_frame = pd.DataFrame(rows)
    trimmed_frame = pd.concat(trimmed, ignore_index=True) if trimmed else pd.DataFrame()
    with store.transaction():
        store.run("delete_study", [sid])
        store.run("insert_study", [sid, dt.datetime.now(), values_source, run_id, grouping, opts.trim_iqr_k,
                                   opts.confidence, opts.bootstrap, opts.seed, config.sha256])
        store.insert("insert_study_groups", groups_frame)
        store.insert("insert_study_trimmed", trimmed_frame)
    return load_study(store, values_source, grouping, run_id)


def load_study(store: Store, values_source: str, grouping: str, run_id: str | None = None) -> dict[str, Any]:
    """A stored study as a JSON-ready dict (the shape `reval study --json` prints)."""
    sid = study_id(values_source, run_id, grouping)
    header = store.frame("study_header", [sid])
    if header.empty:
        raise UserError(f"No stored ratio study for {SOURCE_LABELS.get(values_source, values_source)} "
                        f"by {grouping}; run `reval study`.")
    h = header.iloc[0]
    trimmed = store.frame("study_trimmed_rows", [sid])
    by_group = {name: g for name, g in trimmed.groupby("group_name")}
    groups = []
    for r in store.frame("study_group_rows", [sid]).itertuples():
        cut = by_group.get(r.group_name, trimmed.iloc[0:0])
        groups.append({
            "group": r.group_name, "property_class": r.property_class, "n": int(r.n), "n_trimmed": int(r.n_trimmed),
            "median_ratio": number(r.median_ratio), "median_ratio_ci": [number(r.median_lo), number(r.median_hi)],
            "mean_ratio": number(r.mean_ratio), "weighted_mean_ratio": number(r.weighted_mean_ratio),
            "cod": number(r.cod), "cod_ci": [number(r.cod_lo), number(r.cod_hi)],
            "prd": number(r.prd), "prd_ci": [number(r.prd_lo), number(r.prd_hi)],
            "prb": number(r.prb), "prb_ci": [number(r.prb_lo), number(r.prb_hi)],
            "decile_median_ratios": [number(v) for v in (r.decile_medians if r.decile_medians is not None else [])],
            "verdicts": json.loads(r.verdicts),
            "values_source": h["values_source"],
            "trimmed": [{"sale_id": t.sale_id, "parcel_id": t.parcel_id, "ratio": float(t.ratio)}
                        for t in cut.itertuples()],
        })
    out: dict[str, Any] = {"values_source": h["values_source"], "values": SOURCE_LABELS[h["values_source"]],
                           "run_id": h["run_id"], "by": h["grouping"], "trim_iqr_k": number(h["trim_iqr_k"]),
                           "confidence": float(h["confidence"]), "groups": groups}
    if h["values_source"] == "model_in_sample":
        out["warning"] = IN_SAMPLE_WARNING
    return out
