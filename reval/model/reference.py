"""The reference parcel of each segment: the point a parcel's contributions are measured from.

A board reads "waterfront +0" for a house not on the water more easily than "waterfront -1,707" (measured
from the segment's average sale). So each segment gets a stated reference parcel built from its own parcels:
a continuous feature at the segment's median, an ordinal one at its lower median (a level), a categorical or
binary one at the baseline level the config names (`baseline`, e.g. "no" for waterfront) or else the
segment's most common level. A feature with no value in the segment is left to the model's fill-in value.
Per segment and vectorised (one pass of each segment's rows), so it scales with the parcels.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np
import pandas as pd

from reval.data.config import BINARY_WORDS, FeatureSpec
from reval.model.design import typical_value


@dataclass(frozen=True)
class References:
    """Each parcel's reference row (raw values, NaN = the model's fill-in) and the stored table: segment, feature,
    value, shown (as a reader sees it) and how it was chosen."""

    rows: np.ndarray
    table: pd.DataFrame


def baselines(declared: Sequence[FeatureSpec]) -> dict[str, float]:
    """The baseline level code of each feature whose config names one (a fit-time choice: no re-import needed)."""
    out = {}
    for f in declared:
        if f.baseline is not None:
            out[f.name] = float(f.levels.index(f.baseline)) if f.kind == "categorical" else BINARY_WORDS[
                f.baseline.lower()]
    return out


def _shown(value: float, f: FeatureSpec) -> str:
    if np.isnan(value):
        return "missing (the model's fill-in value)"
    if f.kind == "binary":
        return "yes" if value == 1 else "no"
    if f.kind in ("ordinal", "categorical"):
        return f.levels[int(value)]
    return f"{value:.6g}"


def _typical(x: np.ndarray, f: FeatureSpec, baseline: float | None) -> tuple[float, str]:
    if baseline is not None:
        return baseline, "baseline (config)"
    if np.isnan(x).all():
        return float("nan"), "no value in the segment"
    how = {"continuous": "median", "ordinal": "lower median"}.get(f.kind, "most common")
    return typical_value(x, f.kind), how


def reference_parcels(X: np.ndarray, segment: np.ndarray, features: Sequence[FeatureSpec],
                      chosen: Mapping[str, float]) -> References:
    """The reference parcel of every segment of `segment` from its rows of X, and each row's reference row."""
    codes, names = pd.factorize(pd.Series(np.asarray(segment).astype(str)))
    order = np.argsort(codes, kind="stable")
    bounds = np.searchsorted(codes[order], np.arange(len(names) + 1))
    per_segment = np.full((len(names), len(features)), np.nan)
    records = []
    for g, name in enumerate(names):
        rows = X[order[bounds[g]:bounds[g + 1]]]
        for j, f in enumerate(features):
            value, how = _typical(rows[:, j], f, chosen.get(f.name))
            per_segment[g, j] = value
            records.append({"segment": name, "feature": f.name, "value": None if np.isnan(value) else value,
                            "shown": _shown(value, f), "how": how})
    table = pd.DataFrame(records, columns=["segment", "feature", "value", "shown", "how"])
    return References(per_segment[codes], table)
