"""Review of staged values per segment: how values move against the prior roll, the sales the fit down-weighted,
the flags on its values (reval/roll/flags.py) and what blocks its approval, and a sales-chasing check.

Value change = new market value / prior value (parcels with a prior value). The report gives its
quantiles, the totals, and the parcels beyond +/- `assessment.review_change_threshold` (the rule of the
`far_from_prior` flag, applied once when the values are staged).

Sales chasing is making sold parcels' values follow their prices. The IAAO Standard on Ratio Studies
(2013), Appendix E on sales-chasing detection (from memory; its text was not at hand), lists ways to see
it: compare the value changes of sold and unsold parcels; compare the distribution of the ratios with what
is expected (chased ratios bunch at 1); and, in its uniformity section, a COD below about 5 can point to
chasing. With an unbiased model chasing hardly moves the median change (measured on the demo: sold and
unsold medians within 2 % with every sold parcel at its price), so the check looks at five things, each a
reason to flag:

1. level of the value changes, sold vs unsold: two-sided Mann-Whitney U p < 0.01 and medians more than
   0.05 apart;
2. distribution of the value changes: two-sample Kolmogorov-Smirnov p < 0.01 and D > 0.20;
3. values at the price: more sold parcels whose roll value lies within 0.5 % (plus half the rounding unit)
   of their own sale price, as sold or time-adjusted, than out-of-fold values put there: at least 3 times
   as many, one-sided binomial p < 0.001 (the expected share is read from the out-of-fold values in a band
   5 times wider, divided by 5);
4. spread on the sales: the COD of the roll's values on the sales below 0.6 times the out-of-fold COD of
   the same sales (the roll's values are in-sample, so some shrinkage is expected);
5. the low-COD limit: the roll's COD on the sales below `[standards] cod_min` (IAAO: 5.0).

The limits are our own choices, set from the demo's measurements (docs/model.md, section 8) so that a
large segment is not flagged for a negligible but significant difference. Fewer sold
parcels (or sales) than the standards' `min_sales` are reported as too few to judge.
"""
from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from scipy.stats import binomtest, ks_2samp, mannwhitneyu

from reval.data.config import Config
from reval.errors import UserError
from reval.data.store import Store
from reval.plain import number, records
from reval.results import ReviewReport, SalesChasing, SegmentReview
from reval.roll.flags import approval_blockers
from reval.stats.ratio_stats import cod

CHASING_P_VALUE = 0.01
CHASING_MEDIAN_GAP = 0.05
CHASING_KS_D = 0.20
AT_PRICE_BAND = 0.005
AT_PRICE_WIDER = 5.0
AT_PRICE_EXCESS = 3.0
AT_PRICE_P_VALUE = 0.001
COD_SHARE_MIN = 0.6
QUANTILES = ("p05", "p25", "median", "p75", "p95")
RULE = (f"flag when sold vs unsold value changes differ in level (Mann-Whitney p < {CHASING_P_VALUE} and median gap "
        f"> {CHASING_MEDIAN_GAP}) or in distribution (Kolmogorov-Smirnov p < {CHASING_P_VALUE} and D > {CHASING_KS_D}), "
        f"when {AT_PRICE_EXCESS:g}x more roll values sit within {100 * AT_PRICE_BAND:g}% of their sale price than "
        f"out-of-fold values do (binomial p < {AT_PRICE_P_VALUE}), when the roll's COD on the sales is below "
        f"{COD_SHARE_MIN} x the out-of-fold COD, or below the low-COD limit")


def _empty(n_sold: int, n_unsold: int, n_sales: int, cod_min: float) -> SalesChasing:
    return {"n_sold": n_sold, "n_unsold": n_unsold, "median_change_sold": None, "median_change_unsold": None,
            "median_gap": None, "u_statistic": None, "p_value": None, "ks_statistic": None, "ks_p_value": None,
            "iqr_change_sold": None, "iqr_change_unsold": None, "n_sales": n_sales, "roll_cod": None,
            "oof_cod": None, "cod_share": None, "cod_min": cod_min, "n_at_price": None, "expected_at_price": None,
            "at_price_p_value": None, "reasons": [], "rule": RULE, "status": "too_few_sales", "flagged": False}


def _iqr(x: np.ndarray) -> float:
    q1, q3 = np.percentile(x, (25.0, 75.0))
    return float(q3 - q1)


def _changes(out: SalesChasing, ratios: np.ndarray, sold: np.ndarray) -> SalesChasing:
    """Level and distribution of the value changes of sold vs unsold parcels."""
    sold_r, unsold_r = ratios[sold], ratios[~sold]
    med_sold, med_unsold = float(np.median(sold_r)) - 1, float(np.median(unsold_r)) - 1
    mw = mannwhitneyu(sold_r, unsold_r, alternative="two-sided")
    ks = ks_2samp(sold_r, unsold_r, alternative="two-sided")
    gap = med_sold - med_unsold
    reasons = list(out["reasons"])
    if mw.pvalue < CHASING_P_VALUE and abs(gap) > CHASING_MEDIAN_GAP:
        reasons.append(f"sold parcels' values changed {100 * med_sold:+.1f}% (median) against {100 * med_unsold:+.1f}% "
                       f"for unsold ones (Mann-Whitney p = {mw.pvalue:.2g})")
    if ks.pvalue < CHASING_P_VALUE and ks.statistic > CHASING_KS_D:
        reasons.append(f"the value changes of sold and unsold parcels are distributed differently (Kolmogorov-Smirnov "
                       f"D = {ks.statistic:.2f}, p = {ks.pvalue:.2g}; IQR {_iqr(sold_r):.3f} sold vs "
                       f"{_iqr(unsold_r):.3f} unsold)")
    return {**out, "median_change_sold": med_sold, "median_change_unsold": med_unsold, "median_gap": gap,
            "u_statistic": float(mw.statistic), "p_value": float(mw.pvalue), "ks_statistic": float(ks.statistic),
            "ks_p_value": float(ks.pvalue), "iqr_change_sold": _iqr(sold_r), "iqr_change_unsold": _iqr(unsold_r),
            "reasons": reasons}


def _near(value: np.ndarray, prices: tuple[np.ndarray, np.ndarray], band: float, rounding: float) -> np.ndarray:
    """Whether each value lies within `band` (relative, plus half the rounding unit) of either price."""
    return np.logical_or.reduce([np.abs(value - p) <= band * p + rounding / 2 for p in prices])


def _on_sales(out: SalesChasing, sales: pd.DataFrame, cod_min: float, rounding: float) -> SalesChasing:
    """Spread of the roll's values on the sales against out-of-fold values, and values sitting at the price."""
    price = sales["adjusted_price"].to_numpy(float)
    roll = sales["roll_value"].to_numpy(float)
    prices = (price, sales["sale_price"].to_numpy(float))
    roll_cod = cod(roll / price)
    reasons = list(out["reasons"])
    out = {**out, "roll_cod": roll_cod, "reasons": reasons}
    if roll_cod < cod_min:
        reasons.append(f"the roll's COD on the sales is {roll_cod:.2f}, below the low-COD limit {cod_min:g}")
    oof = sales["oof_value"].to_numpy(float)
    if np.isfinite(oof).all() and (oof > 0).all():
        oof_cod = cod(oof / price)
        n = len(sales)
        at_price = int(_near(roll, prices, AT_PRICE_BAND, rounding).sum())
        wide = int(_near(oof, prices, AT_PRICE_WIDER * AT_PRICE_BAND, rounding).sum())
        expected_share = max(wide, 1) / (AT_PRICE_WIDER * n)
        p_at = float(binomtest(at_price, n, min(expected_share, 1.0), alternative="greater").pvalue)
        share = roll_cod / oof_cod if oof_cod > 0 else None
        if share is not None and share < COD_SHARE_MIN:
            reasons.append(f"the roll's COD on the sales ({roll_cod:.2f}) is {share:.2f} times the out-of-fold COD "
                           f"({oof_cod:.2f}): values follow the prices more closely than the model can")
        if at_price >= AT_PRICE_EXCESS * expected_share * n and p_at < AT_PRICE_P_VALUE:
            reasons.append(f"{at_price} of {n} sold parcels are valued within {100 * AT_PRICE_BAND:g}% of their sale "
                           f"price against {expected_share * n:.1f} expected from out-of-fold values (p = {p_at:.2g})")
        out.update({"oof_cod": oof_cod, "cod_share": share, "n_at_price": at_price,
                    "expected_at_price": expected_share * n, "at_price_p_value": p_at})
    return out


def sales_chasing(ratios: np.ndarray, sold: np.ndarray, min_sales: int, sales: pd.DataFrame | None = None,
                  cod_min: float = 5.0, rounding: float = 0.0) -> SalesChasing:
    """The chasing check of one segment: value changes (`ratios` = new / prior value, `sold` marks parcels
    with a qualified sale) and, given `sales` (roll_value, oof_value, adjusted_price, sale_price per sale),
    the roll's values on the sales. Each part runs only with at least `min_sales` observations."""
    ratios, sold = np.asarray(ratios, dtype=float), np.asarray(sold, dtype=bool)
    n_sales = 0 if sales is None else len(sales)
    out = _empty(int(sold.sum()), int((~sold).sum()), n_sales, cod_min)
    judged = False
    if out["n_sold"] >= min_sales and out["n_unsold"] >= min_sales:
        out, judged = _changes(out, ratios, sold), True
    if sales is not None and n_sales >= min_sales:
        out, judged = _on_sales(out, sales, cod_min, rounding), True
    if not judged:
        return out
    flagged = bool(out["reasons"])
    return {**out, "status": "flagged" if flagged else "pass", "flagged": flagged}


def review(store: Store, config: Config, segment: str | None = None, limit: int = 20) -> ReviewReport:
    """The review report for one segment or all: each segment's open batch (else its certified one)."""
    batches = store.frame("review_batches", {"segment": segment})
    if batches.empty:
        raise UserError(f"No batch to review{' for ' + segment if segment else ''}: run `reval value` first.")
    threshold = config.assessment.review_change_threshold
    ids = batches["batch_id"].tolist()
    summary = store.frame("review_summary", {"batch_ids": ids}).set_index("batch_id")
    beyond = store.frame("review_beyond", {"batch_ids": ids, "limit": limit})
    changes = store.frame("review_changes", {"batch_ids": ids})
    light = store.frame("review_downweighted", {"batch_ids": ids, "limit": limit})
    sold_sales = store.frame("review_sales", {"batch_ids": ids})
    flags = store.frame("review_flags", {"batch_ids": ids})
    blocked = approval_blockers(store, ids)
    counts: dict[tuple[int, str], dict[str, int]] = {}
    for f in flags.itertuples():
        counts.setdefault((int(f.batch_id), str(f.level)), {})[str(f.flag)] = int(f.n)
    by_batch = dict(list(changes.groupby("batch_id")))
    sales_by_batch = dict(list(sold_sales.groupby("batch_id")))
    listed = dict(list(beyond.groupby("batch_id")))
    lightest = dict(list(light.groupby("batch_id")))
    empty, no_sales = changes.iloc[0:0], sold_sales.iloc[0:0]
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
                                           config.standards.min_sales, sales_by_batch.get(b.batch_id, no_sales),
                                           config.standards.cod_min, config.assessment.rounding),
            "flags": counts.get((int(b.batch_id), "kind"), {}), "flag_codes": counts.get((int(b.batch_id), "code"), {}),
            "blockers": blocked.get(int(b.batch_id), []) if b.state in ("staged", "held") else [],
        })
    return {"threshold": threshold, "listed_per_segment": limit, "segments": segments}


def _ratio(new: Any, old: Any) -> float | None:
    return None if number(new) is None or not number(old) else float(new) / float(old) - 1
