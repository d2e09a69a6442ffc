"""Stored ratio studies read back as plain, typed data: the one reader the study step, the approval gate
and the app share (no pandas, so the app's overview can use it)."""
from __future__ import annotations

import json
from typing import Any, NotRequired, TypedDict

from reval.data.store import Store
from reval.errors import UserError
from reval.plain import number
from reval.states import Grouping, ValuesSource, VerdictStatus
from reval.stats.sources import FINAL_WARNING, IN_SAMPLE_WARNING, SOURCE_LABELS

STATS = ("median_ratio", "cod", "prd", "prb")
CI_COLUMNS = {"median_ratio": "median", "cod": "cod", "prd": "prd", "prb": "prb"}  # stored as <name>_lo, _hi


class VerdictEntry(TypedDict):
    status: VerdictStatus
    limit: str
    value: float | None


class TrimmedSale(TypedDict):
    sale_id: str
    parcel_id: str
    ratio: float


class DownweightedSale(TypedDict):
    sale_id: str
    parcel_id: str
    weight: float
    reason: str | None


class StudyGroup(TypedDict):
    """One group's statistics, confidence intervals ([lo, hi], None where undefined) and verdicts."""

    group: str
    property_class: str | None
    n: int
    n_trimmed: int
    median_ratio: float | None
    median_ratio_ci: list[float | None]
    mean_ratio: float | None
    weighted_mean_ratio: float | None
    cod: float | None
    cod_ci: list[float | None]
    prd: float | None
    prd_ci: list[float | None]
    prb: float | None
    prb_ci: list[float | None]
    decile_median_ratios: list[float | None]          # by price decile
    proxy_decile_median_ratios: list[float | None]    # by decile of the IAAO value proxy
    verdicts: dict[str, VerdictEntry]
    values_source: ValuesSource
    trimmed: NotRequired[list[TrimmedSale]]
    downweighted: NotRequired[list[DownweightedSale]]


class StudyResult(TypedDict):
    """A stored study: what its values were, how it was made, and its groups."""

    study_id: str
    values_source: ValuesSource
    values: str
    run_id: str | None
    by: Grouping
    trim_iqr_k: float | None
    confidence: float
    groups: list[StudyGroup]
    warning: NotRequired[str]


def study_id(values_source: str, run_id: str | None, grouping: str) -> str:
    return f"{values_source}/{run_id or '-'}/{grouping}"


def group_from_row(row: dict[str, Any], values_source: ValuesSource) -> StudyGroup:
    """A stored study_groups row in the shape every reader uses (without its trimmed sales)."""
    return {"group": row["group_name"], "property_class": row["property_class"], "n": int(row["n"]),
            "n_trimmed": int(row["n_trimmed"]),
            "median_ratio": number(row["median_ratio"]),
            "median_ratio_ci": [number(row["median_lo"]), number(row["median_hi"])],
            "mean_ratio": number(row["mean_ratio"]), "weighted_mean_ratio": number(row["weighted_mean_ratio"]),
            "cod": number(row["cod"]), "cod_ci": [number(row["cod_lo"]), number(row["cod_hi"])],
            "prd": number(row["prd"]), "prd_ci": [number(row["prd_lo"]), number(row["prd_hi"])],
            "prb": number(row["prb"]), "prb_ci": [number(row["prb_lo"]), number(row["prb_hi"])],
            "decile_median_ratios": [number(v) for v in row["decile_medians"] or []],
            "proxy_decile_median_ratios": [number(v) for v in row.get("proxy_decile_medians") or []],
            "verdicts": json.loads(row["verdicts"]), "values_source": values_source}


def stored_groups(store: Store, sid: str, values_source: ValuesSource) -> list[StudyGroup]:
    """The groups of a stored study, in name order, without their trimmed sales."""
    return [group_from_row(r, values_source) for r in store.records("study_group_rows", [sid])]


def load_study(store: Store, values_source: ValuesSource, grouping: Grouping, run_id: str | None = None) -> StudyResult:
    """A stored study with every group's trimmed sales and, for model values, the sales its run's fit gave less
    than full weight (the shape `reval study --json` prints)."""
    sid = study_id(values_source, run_id, grouping)
    header = store.records("study_header", [sid])
    if not header:
        raise UserError(f"No stored ratio study for {SOURCE_LABELS.get(values_source, values_source)} "
                        f"by {grouping}; run `reval study`.")
    h = header[0]
    trimmed: dict[str, list[TrimmedSale]] = {}
    for t in store.records("study_trimmed_rows", [sid]):
        trimmed.setdefault(t["group_name"], []).append(
            {"sale_id": t["sale_id"], "parcel_id": t["parcel_id"], "ratio": float(t["ratio"])})
    light: dict[str, list[DownweightedSale]] = {}
    for d in store.records("study_downweighted_rows", [sid]):
        light.setdefault(d["group_name"], []).append(
            {"sale_id": d["sale_id"], "parcel_id": d["parcel_id"], "weight": float(d["weight"]), "reason": d["reason"]})
    groups = stored_groups(store, sid, h["values_source"])
    for g in groups:
        g["trimmed"] = trimmed.get(g["group"], [])
        g["downweighted"] = light.get(g["group"], [])
    out: StudyResult = {"study_id": sid, "values_source": h["values_source"], "values": SOURCE_LABELS[h["values_source"]],
                        "run_id": h["run_id"], "by": h["grouping"], "trim_iqr_k": number(h["trim_iqr_k"]),
                        "confidence": float(h["confidence"]), "groups": groups}
    if h["values_source"] == "model_in_sample":
        out["warning"] = IN_SAMPLE_WARNING
    elif h["values_source"] == "final":
        out["warning"] = FINAL_WARNING
    return out
