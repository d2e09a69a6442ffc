"""Ratio studies per group, stored so the app reads them without recomputing.

The statistics are reval.ratio_stats (one implementation); this module groups sales, judges each group
against the standards, labels what the values were, and stores and reads the results. The approval gate
judges segments with the same code, now, under the current standards (`segments_judgement`).
"""
from __future__ import annotations

import hashlib
import json
import logging
from typing import Any

import numpy as np
import pandas as pd

from reval.clock import utc_now
from reval.data.config import Config
from reval.errors import UserError
from reval.stats.judging import judging_sha256
from reval.stats.ratio_stats import RatioStudy, ratio_study, value_proxy
from reval.stats.standards import judge
from reval.data.store import Store
from reval.plain import number
from reval.roll.batch_states import current_batch, outdated, segment_states
from reval.states import GROUPINGS, Grouping, ValuesSource
from reval.stats.sources import SOURCE_LABELS
from reval.stats.stored import StudyGroup, StudyResult, group_from_row, load_study, stored_groups, study_id

GROUP_COLUMNS: dict[str, tuple[str, ...]] = {"segment": ("segment",), "market_area": ("market_area",),
                                             "class": ("property_class",),
                                             "segment_class": ("segment", "property_class"), "all": ()}
CLASS_SEPARATOR = " / "   # the group name of a segment x class study: "ASKR / single_family"
log = logging.getLogger("reval")


def final_batches(store: Store) -> list[int]:
    """The batches whose roll values a study of final values reads: each segment's current batch (open, else
    certified); a notice names the segments whose batch is outdated by a later correction or override."""
    states = segment_states(store)
    current = [(e["segment"], b) for e in states if (b := current_batch(e)) is not None]
    if not current:
        raise UserError("No values on the roll yet: run `reval value` before a study of final values.")
    stale = [s for s, b in current if outdated(b)]
    if stale:
        log.warning("final values of %s predate a correction or override: run `reval value` to include it",
                    ", ".join(stale))
    return [int(b["batch_id"]) for _, b in current]


BANDS = 5                 # value ranges and size bands are quintiles (common practice)
BANDED_GROUPINGS: tuple[Grouping, ...] = ("value_range", "age", "size")   # groups made from values, not names
UNKNOWN = "unknown"       # the age or size group of parcels without the feature's value


def available_groupings(store: Store, config: Config) -> tuple[Grouping, ...]:
    """Every grouping this project can be studied by: age and size need their configured feature declared."""
    names = {r["name"] for r in store.records("feature_list")}
    needs = {"age": config.study.age_feature, "size": config.study.size_feature}
    return tuple(g for g in GROUPINGS if g not in needs or needs[g] in names)


def _feature_position(store: Store, name: str, key: str) -> int:
    for r in store.records("feature_list"):
        if r["name"] == name:
            return int(r["position"])
    raise UserError(f"No feature named '{name}' is declared; set [study] {key} to a declared feature.")


def _band_labels(edges: list[float]) -> list[str]:
    """Names of the bands cut at `edges`, numbered so they sort in order: "1: under 1,200", "2: 1,200 to 1,600" ..."""
    if not edges:
        return ["1: all"]
    cuts = [f"{e:,.0f}" for e in edges]
    return ([f"1: under {cuts[0]}"] + [f"{i + 2}: {a} to {b}" for i, (a, b) in enumerate(zip(cuts, cuts[1:]))]
            + [f"{len(cuts) + 1}: {cuts[-1]} and over"])


def _nice_edges(values: np.ndarray) -> list[float]:
    """Distinct cut points rounded to two significant digits, so band names read plainly."""
    return sorted({float(f"{v:.2g}") for v in values if np.isfinite(v)})


def _in_bands(x: np.ndarray, edges: list[float]) -> np.ndarray:
    labels = np.array(_band_labels(edges) + [UNKNOWN], dtype=object)
    index = np.searchsorted(np.asarray(edges, dtype=float), x, side="right")
    return labels[np.where(np.isnan(x), len(labels) - 1, index)]


def _banded(store: Store, config: Config, sales: pd.DataFrame, grouping: Grouping) -> tuple[pd.Series, list[str]]:
    """Each sale's group and every group name of a banded grouping: value range (quintiles of the sales' IAAO
    value proxy, with the median ratio of all the study's sales), age (decade of the age feature) or size
    (quintile bands of the size feature over all parcels); age and size list the groups without sales."""
    probabilities = [k / BANDS for k in range(1, BANDS)]
    if grouping == "value_range":
        v, p = sales["value"].to_numpy(float), sales["price"].to_numpy(float)
        proxy = value_proxy(v, p, float(np.median(v / p))) if len(v) else v
        edges = _nice_edges(np.quantile(proxy, probabilities)) if len(v) else []
        return pd.Series(_in_bands(proxy, edges), index=sales.index), _band_labels(edges)
    key = "age_feature" if grouping == "age" else "size_feature"
    position = _feature_position(store, getattr(config.study, key), key)
    features = store.frame("study_sale_feature", [position]).set_index("parcel_id")["value"]
    x = sales["parcel_id"].map(features).to_numpy(float)
    if grouping == "age":
        decades = [d for (d,) in store.rows("study_feature_decades", [position])]
        units = [UNKNOWN if d is None else f"{int(d)}s" for d in decades]
        keys = np.where(np.isnan(x), UNKNOWN, np.char.add((np.floor(np.nan_to_num(x) / 10) * 10).astype(int).astype(str), "s"))
        return pd.Series(keys, index=sales.index, dtype=object), units
    quantiles, missing = store.rows("study_feature_quantiles", [position, probabilities])[0]
    edges = _nice_edges(np.asarray(quantiles or [], dtype=float))
    return pd.Series(_in_bands(x, edges), index=sales.index), _band_labels(edges) + ([UNKNOWN] if missing else [])


def sales_for_study(store: Store, values_source: str, run_id: str | None) -> pd.DataFrame:
    """Sales with columns sale_id, parcel_id, price (time-adjusted), value, segment, market_area, property_class;
    for model values also the sale's weight in the run's fit and why it is below 1. Model values leave out the
    sales of overridden parcels (the analyst set the model's value aside there); final values (the roll after
    overrides) include them."""
    if store.rows("count_adjusted_sales")[0][0] == 0:
        raise UserError("No prepared sales yet: run `reval sales` first.")
    if values_source == "prior":
        return store.frame("study_sales_prior")
    if values_source == "final":
        return store.frame("study_sales_final", {"batch_ids": final_batches(store)})
    column = "oof_value" if values_source == "model_out_of_fold" else "insample_value"
    frame = store.frame("study_sales_model", [run_id])
    return frame.assign(value=frame[column]).drop(columns=["oof_value", "insample_value"])


def sales_sha256(sales: pd.DataFrame) -> str:
    """Fingerprint of a study's sales: everything a group's statistics and verdicts are computed from."""
    columns = sales[["sale_id", "price", "value", "segment", "property_class"]].astype(
        {"segment": str, "property_class": str})
    return hashlib.sha256(pd.util.hash_pandas_object(columns, index=False).to_numpy().tobytes()).hexdigest()


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
            "proxy_decile_medians": [number(v) for v in s.proxy_decile_median_ratios],
            "verdicts": json.dumps({k: {"status": v.status, "limit": v.limit, "value": number(v.value)}
                                    for k, v in verdicts.items()})}


def _judged(frame: pd.DataFrame, sid: str, name: str, config: Config,
            cls: str | None = None) -> tuple[dict[str, Any], pd.DataFrame]:
    """One group's stored row (statistics and verdicts) and its trimmed sales; `cls` is the group's own class
    when it is one (else the most common class among its sales sets the COD limit)."""
    opts = config.study
    s = ratio_study(frame["value"].to_numpy(float), frame["price"].to_numpy(float), confidence=opts.confidence,
                    n_boot=opts.bootstrap, seed=opts.seed, trim_iqr_k=opts.trim_iqr_k)
    cls = cls or _group_class(frame)
    cut = frame.loc[s.trimmed]
    trimmed = pd.DataFrame({"study_id": sid, "group_name": name, "sale_id": cut["sale_id"],
                            "parcel_id": cut["parcel_id"], "ratio": cut["value"] / cut["price"]})
    return _group_row(sid, name, cls, s, judge(s, config.standards, cls)), trimmed


def _downweighted(frame: pd.DataFrame, sid: str, name: str) -> pd.DataFrame:
    """A group's sales the fit gave a weight below 1, with why (model values only)."""
    light = frame[frame["weight"] < 1]
    return pd.DataFrame({"study_id": sid, "group_name": name, "sale_id": light["sale_id"],
                         "parcel_id": light["parcel_id"], "weight": light["weight"], "reason": light["weight_reason"]})


def _groups(store: Store, config: Config, sales: pd.DataFrame,
            grouping: Grouping) -> list[tuple[str, str | None, pd.DataFrame]]:
    """(name, own class or None, sales) of every group of the grouping, those without sales included."""
    if grouping not in GROUP_COLUMNS:
        keys, names = _banded(store, config, sales, grouping)
        at = keys.groupby(keys).indices
        return [(name, None, sales.iloc[at[name]] if name in at else sales.iloc[0:0]) for name in names]
    columns = list(GROUP_COLUMNS[grouping])
    if not columns:
        return [("all", None, sales)]
    units = store.frame("study_units")[columns].drop_duplicates().astype(str)
    keys = sales[columns[0]].astype(str)
    for column in columns[1:]:
        keys = keys + CLASS_SEPARATOR + sales[column].astype(str)
    rows = keys.groupby(keys).indices
    empty = sales.iloc[0:0]
    out = []
    for unit in units.itertuples(index=False):
        name = CLASS_SEPARATOR.join(unit)
        own = unit[-1] if "property_class" in columns else None
        out.append((name, own, sales.iloc[rows[name]] if name in rows else empty))
    return sorted(out, key=lambda g: g[0])


def run_study(store: Store, config: Config, values_source: ValuesSource = "prior", grouping: Grouping = "segment",
              run_id: str | None = None) -> StudyResult:
    """Compute, store (replacing the same study) and return a ratio study; every segment (market area,
    class) is a group, those without sales reported as "no sales"."""
    sales = sales_for_study(store, values_source, run_id)
    sid = study_id(values_source, run_id, grouping)
    opts = config.study
    groups = _groups(store, config, sales, grouping)
    judged = [_judged(frame, sid, name, config, cls) for name, cls, frame in groups]
    groups_frame = pd.DataFrame([row for row, _ in judged])
    cut = [t for _, t in judged]
    trimmed_frame = pd.concat(cut, ignore_index=True) if cut else pd.DataFrame()
    light = [_downweighted(frame, sid, name) for name, _, frame in groups if "weight" in frame]
    downweighted_frame = pd.concat(light, ignore_index=True) if light else pd.DataFrame()
    with store.transaction():
        store.run("delete_study", [sid])
        store.run("insert_study", [sid, utc_now(), values_source, run_id, grouping, opts.trim_iqr_k,
                                   opts.confidence, opts.bootstrap, opts.seed, config.sha256, judging_sha256(config),
                                   sales_sha256(sales)])
        store.insert("insert_study_groups", groups_frame)
        store.insert("insert_study_trimmed", trimmed_frame)
        store.insert("insert_study_downweighted", downweighted_frame)
    return load_study(store, values_source, grouping, run_id)


def _stored_groups(store: Store, config: Config, values_source: ValuesSource, run_id: str | None,
                   sales: pd.DataFrame) -> dict[str, StudyGroup] | None:
    """The run's stored studies by segment and by segment x class, by group name, when both were computed on
    these very sales under the judging basis in force (then they are what judging now would give); else None."""
    wanted = (judging_sha256(config), sales_sha256(sales))
    out: dict[str, StudyGroup] = {}
    for grouping in ("segment", "segment_class"):
        sid = study_id(values_source, run_id, grouping)
        header = store.records("study_header", [sid])
        if not header or (header[0]["judged_sha256"], header[0]["sales_sha256"]) != wanted:
            return None
        out |= {g["group"]: g for g in stored_groups(store, sid, values_source)}
    return out


def segments_judgement(store: Store, config: Config, values_source: ValuesSource, run_id: str | None,
                       segments: list[str]) -> dict[str, tuple[StudyGroup, list[StudyGroup]]]:
    """Each named segment's ratio statistics and verdicts under the current standards and study settings, and
    those of each of its property classes when it has several: what the approval gate judges. The run's sales
    are read once; a stored study of the same sales under the same judging basis is the same computation (a
    seeded bootstrap) and is read instead of repeated, which makes judging hundreds of segments fast."""
    sales = sales_for_study(store, values_source, run_id)
    units = store.frame("study_units")
    classes_of = units.groupby(units["segment"].astype(str))["property_class"].agg(lambda c: sorted(map(str, set(c))))
    stored = _stored_groups(store, config, values_source, run_id, sales)
    rows = sales.groupby(sales["segment"].astype(str)).indices
    sid, class_sid = study_id(values_source, run_id, "segment"), study_id(values_source, run_id, "segment_class")

    def judged(frame: pd.DataFrame, study: str, name: str, cls: str | None = None) -> StudyGroup:
        if stored is not None and name in stored:
            return stored[name]
        return group_from_row(_judged(frame, study, name, config, cls)[0], values_source)

    out = {}
    for segment in segments:
        mine = sales.iloc[rows[segment]] if segment in rows else sales.iloc[0:0]
        classes = classes_of.get(segment, [])
        per_class = [judged(mine[mine["property_class"] == cls], class_sid, f"{segment}{CLASS_SEPARATOR}{cls}", cls)
                     for cls in classes] if len(classes) > 1 else []
        out[segment] = (judged(mine, sid, segment), per_class)
    return out


ALL_PROJECTS = "all projects"


def combined_study(projects: list[tuple[str, pd.DataFrame]], config: Config, values_source: ValuesSource) -> StudyResult:
    """A ratio study across projects (nothing stored): each project's sales (`sales_for_study` of its store) as
    one group and all of them together, judged by the same code under `config`'s standards and study settings."""
    sid = study_id(values_source, None, "projects")
    frames = [(name, frame) for name, frame in projects] + [(ALL_PROJECTS, pd.concat([f for _, f in projects],
                                                                                     ignore_index=True))]
    groups = [group_from_row(_judged(frame, sid, name, config)[0], values_source) for name, frame in frames]
    return {"study_id": sid, "values_source": values_source, "values": SOURCE_LABELS[values_source], "run_id": None,
            "by": "all", "trim_iqr_k": config.study.trim_iqr_k, "confidence": config.study.confidence,
            "groups": groups}
