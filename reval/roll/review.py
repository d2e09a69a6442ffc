"""Review of staged values per segment: how values move against the prior roll, the sales the fit down-weighted,
and a sales-chasing check.

Value change = new market value / prior value (parcels with a prior value). The report gives its
quantiles, the totals, and the parcels beyond +/- `assessment.review_change_threshold`.

Sales chasing is making sold parcels' values follow their prices; it shows as sold parcels' values
changing differently from unsold ones'. The IAAO Standard on Ratio Studies (2013) discusses detecting it
by comparing the value changes of sold and unsold parcels, with a nonparametric test such as the
Mann-Whitney U test (from memory; its text was not at hand). Rule here: a segment is flagged when the
two-sided Mann-Whitney U p-value is below CHASING_P_VALUE (0.01) AND the medians of the value change
of sold and unsold parcels differ by more than CHASING_MEDIAN_GAP (0.05). Both limits are our own choice,
made so that a large segment is not flagged for a negligible but significant difference. Fewer sold
parcels than the standards' `min_sales` are reported as too few to judge.
"""
from __future__ import annotations

from typing import Any

import numpy as np
from scipy.stats import mannwhitneyu

from reval.data.config import Config
from reval.errors import UserError
from reval.data.store import Store
from reval.plain import number, records
from reval.results import ReviewReport, SalesChasing, SegmentReview

CHASING_P_VALUE = 0.01
CHASING_MEDIAN_GAP = 0.05
QUANTILES = ("p05", "p25", "median", "p75", "p95")


def sales_chasing(ratios: np.ndarray, sold: np.ndarray, min_sales: int) -> SalesChasing:
    """Compare value changes of sold and unsold parcels: medians, their gap, Mann-Whitney U and the verdict."""
    sold_r, unsold_r = ratios[sold], ratios[~sold]
    out: SalesChasing = {"n_sold": int(sold_r.size), "n_unsold": int(unsold_r.size),
                         "median_change_sold": None, "median_change_unsold": None, "median_gap": None,
                         "u_statistic": None, "p_value": None,
                         "rule": f"flag when p < {CHASING_P_VALUE} and |median gap| > {CHASING_MEDIAN_GAP}",
                         "status": "too_few_sales", "flagged": False}
    if sold_r.size < min_sales or unsold_r.size < min_sales:
        return out
    med_sold, med_unsold = float(np.median(sold_r)) - 1, float(np.median(unsold_r)) - 1
    test = mannwhitneyu(sold_r, unsold_r, alternative="two-sided")
    gap = med_sold - med_unsold
    flagged = bool(test.pvalue < CHASING_P_VALUE and abs(gap) > CHASING_MEDIAN_GAP)
    return {**out, "median_change_sold": med_sold, "median_change_unsold": med_unsold, "median_gap": gap,
            "u_statistic": float(test.statistic), "p_value": float(test.pvalue),
            "status": "flagged" if flagged else "pass", "flagged": flagged}


def review(store: Store, config: Config, segment: str | None = None, limit: int = 20) -> ReviewReport:
    """The review report for one segment or all: each segment's open batch (else its certified one)."""
    batches = store.frame("review_batches", {"segment": segment})
    if batches.empty:
        raise UserError(f"No batch to review{' for ' + segment if segment else ''}: run `reval value` first.")
    threshold = config.assessment.review_change_threshold
    ids = batches["batch_id"].tolist()
    summary = store.frame("review_summary", {"batch_ids": ids, "threshold": threshold}).set_index("batch_id")
    beyond = store.frame("review_beyond", {"batch_ids": ids, "threshold": threshold, "limit": limit})
    changes = store.frame("review_changes", {"batch_ids": ids})
    light = store.frame("review_downweighted", {"batch_ids": ids, "limit": limit})
    by_batch = dict(list(changes.groupby("batch_id")))
    listed = dict(list(beyond.groupby("batch_id")))
    lightest = dict(list(light.groupby("batch_id")))
    empty = changes.iloc[0:0]
    segments: list[SegmentReview] = []
    for b in batches.itertuples():
        s = summary.loc[b.batch_id]
        moved = by_batch.get(b.batch_id, empty)
        quantiles = s["ratio_quantiles"]
        segments.append({
            "segment": b.segment, "batch_id": int(b.batch_id), "run_id": b.run_id, "state": b.state,
            "note": b.note, "n_parcels": int(s["n_parcels"]), "n_with_prior": int(s["n_with_prior"]),
            "totals": {k: number(s[f"{k}_total"]) for k in ("prior", "market", "assessed", "land", "improvement")},
            "total_change": _ratio(s["market_total"], s["prior_total"]),
            "change_ratio_quantiles": dict(zip(QUANTILES, [number(q) for q in quantiles]))
            if quantiles is not None else None,
            "n_beyond_threshold": int(s["n_beyond"]),
            "beyond_threshold": records(listed.get(b.batch_id, beyond.iloc[0:0]).drop(columns="batch_id")),
            "n_downweighted": int(lightest[b.batch_id]["n"].iloc[0]) if b.batch_id in lightest else 0,
            "downweighted": records(lightest.get(b.batch_id, light.iloc[0:0]).drop(columns=["batch_id", "n"])),
            "sales_chasing": sales_chasing(moved["ratio"].to_numpy(float), moved["sold"].to_numpy(bool),
                                           config.standards.min_sales),
        })
    return {"threshold": threshold, "listed_per_segment": limit, "segments": segments}


def _ratio(new: Any, old: Any) -> float | None:
    return None if number(new) is None or not number(old) else float(new) / float(old) - 1
