"""Do the sold parcels resemble all parcels? Per segment and feature, the sold and unsold parcels' values compared
with a two-sample test, computed from counts of each distinct value (so a million parcels cost one row per
distinct value, counted in SQL).

Tests (named in the report): ordered features (continuous, ordinal, binary) - the Mann-Whitney U test, two-sided,
normal approximation with the tie correction and the continuity correction, the same as
`scipy.stats.mannwhitneyu(..., method="asymptotic")` (tests/test_report.py checks it against SciPy on raw values);
categorical features - the chi-square test of homogeneity, `scipy.stats.chi2_contingency` (Yates' correction
for a 2 x 2 table, SciPy's default).
"""
from __future__ import annotations

from typing import TypedDict

import numpy as np
import pandas as pd
from scipy import stats

MANN_WHITNEY = "Mann-Whitney U (scipy.stats.mannwhitneyu, asymptotic)"
CHI_SQUARE = "chi-square of homogeneity (scipy.stats.chi2_contingency)"


class FeatureComparison(TypedDict):
    segment: str
    feature: str
    n_all: int
    n_sold: int
    mean_all: float | None
    mean_sold: float | None
    test: str
    statistic: float | None
    p_value: float | None


def mann_whitney_counts(values: np.ndarray, sold: np.ndarray, unsold: np.ndarray) -> tuple[float, float]:
    """U of the sold sample and its two-sided p-value from counts of sold and unsold parcels at each distinct
    value (`values` ascending): mid-ranks of tied values, the tie-corrected variance and a continuity
    correction of 0.5, as scipy.stats.mannwhitneyu's asymptotic method."""
    n1, n0 = float(sold.sum()), float(unsold.sum())
    t = sold + unsold
    n = n1 + n0
    mid_rank = np.cumsum(t) - (t - 1) / 2.0
    u1 = float((sold * mid_rank).sum() - n1 * (n1 + 1) / 2.0)
    tie = float((t ** 3 - t).sum())
    sigma = np.sqrt(n1 * n0 / 12.0 * ((n + 1) - tie / (n * (n - 1)))) if n > 1 else 0.0
    if sigma == 0:
        return u1, float("nan")
    z = (abs(u1 - n1 * n0 / 2.0) - 0.5) / sigma
    return u1, float(min(1.0, 2.0 * stats.norm.sf(z)))


def compare_features(counts: pd.DataFrame, features: list[tuple[int, str, str]]) -> list[FeatureComparison]:
    """One comparison per segment and feature from `report_feature_counts` rows (segment, position, value, sold,
    n); `features` are (position, name, kind)."""
    out: list[FeatureComparison] = []
    kinds = {p: (name, kind) for p, name, kind in features}
    wide = (counts.groupby(["segment", "position", "value", "sold"], sort=True)["n"].sum()
            .unstack("sold", fill_value=0).reindex(columns=[False, True], fill_value=0).reset_index())
    all_values, all_unsold, all_sold = (wide[c].to_numpy(float) for c in ("value", False, True))
    for (segment, position), at in sorted(wide.groupby(["segment", "position"]).indices.items()):
        name, kind = kinds[int(position)]
        values, unsold, sold = all_values[at], all_unsold[at], all_sold[at]
        n_sold, n_all = int(sold.sum()), int(sold.sum() + unsold.sum())
        statistic: float | None = None
        p_value: float | None = None
        if n_sold and n_all > n_sold:
            if kind == "categorical":
                present = (sold + unsold) > 0
                if present.sum() > 1:
                    chi = stats.chi2_contingency(np.vstack([sold[present], unsold[present]]))
                    statistic, p_value = float(chi.statistic), float(chi.pvalue)
            else:
                u, p = mann_whitney_counts(values, sold, unsold)
                statistic, p_value = u, (None if np.isnan(p) else p)
        ordered = kind != "categorical"
        out.append({"segment": str(segment), "feature": name, "n_all": n_all, "n_sold": n_sold,
                    "mean_all": float((values * (sold + unsold)).sum() / n_all) if ordered and n_all else None,
                    "mean_sold": float((values * sold).sum() / n_sold) if ordered and n_sold else None,
                    "test": CHI_SQUARE if kind == "categorical" else MANN_WHITNEY,
                    "statistic": statistic, "p_value": p_value})
    return out
