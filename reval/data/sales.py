"""Sales preparation: qualify sales by the config's rules, estimate the market trend and express every
qualified sale price at the valuation date. One transaction; every excluded sale keeps its reason."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from reval.data.config import Config
from reval.data.dataset import SalesData, qualified_sales
from reval.errors import UserError
from reval.data.events import record_event
from reval.data.store import Store
from reval.data.market_trend import adjustment_factors, estimate_trends, month_offsets
from reval.results import SalesCounts, SegmentSales

Progress = Callable[[str, int, int], None]


@dataclass(frozen=True)
class SalesSummary:
    """Kept and excluded sales per segment and reason."""

    counts: pd.DataFrame   # segment, outcome, n

    def as_dict(self) -> SalesCounts:
        by_reason = self.counts.groupby("outcome")["n"].sum()
        segments: list[SegmentSales] = []
        for segment, group in self.counts.groupby("segment", sort=True):
            outcomes = {str(k): int(v) for k, v in zip(group["outcome"], group["n"])}
            kept = outcomes.pop("qualified", 0)
            segments.append({"segment": str(segment), "qualified": kept, "excluded": sum(outcomes.values()),
                             "excluded_by_reason": outcomes})
        return {"qualified": int(by_reason.get("qualified", 0)),
                "excluded": int(by_reason.drop("qualified", errors="ignore").sum()),
                "excluded_by_reason": {str(k): int(v) for k, v in by_reason.drop("qualified", errors="ignore").items()},
                "segments": segments}


def prepare_sales(store: Store, config: Config, progress: Progress | None = None) -> SalesSummary:
    """Qualify, estimate the trend and time-adjust, replacing the previous preparation atomically."""
    rules = config.sales
    with store.transaction() as con:
        store.run("clear_sales_preparation")
        store.run("qualify_sales", [config.sale_window_start, config.valuation_date,
                                    list(rules.validity_codes_kept) if rules.validity_codes_kept else None,
                                    rules.exclude_multi_parcel,
                                    list(rules.property_classes) if rules.property_classes else None,
                                    rules.price_min, rules.price_max])
        if progress:
            progress("qualifying sales", 1, 2)
        data = qualified_sales(store)
        if len(data.frame) == 0:
            raise UserError("No sale qualifies under the [sales] rules in reval.toml; nothing was changed. "
                            "Check validity_codes_kept, the sale window and the price bounds.")
        _time_adjust(store, config, data)
        if progress:
            progress("qualifying sales", 2, 2)
        summary = SalesSummary(store.frame("sales_counts"))
        counts = summary.as_dict()
        record_event(con, "sales", {"qualified": counts["qualified"], "excluded_by_reason": counts["excluded_by_reason"],
                                    "config_sha256": config.sha256})
    return summary


def _time_adjust(store: Store, config: Config, data: SalesData) -> None:
    frame = data.frame
    months = month_offsets(frame["sale_date"].to_numpy(dtype="datetime64[D]"), config.valuation_date)
    fit = data.in_fit(config.sales.multi_parcel_in_fit)   # the trend is estimated on the sales the model fits
    trends = estimate_trends(months[fit], np.log(data.fit_price("sale_price")[fit]), data.X[fit], data.features,
                             frame["segment"].to_numpy()[fit], frame["market_area"].to_numpy()[fit],
                             window_months=config.sale_window_months, by_market_area=config.time.by_market_area,
                             min_sales_market_area=config.time.min_sales_market_area, n_basis=config.time.n_basis)
    trend_frame = pd.concat([pd.DataFrame({"area": t.area, "month_offset": t.months.astype(int),
                                           "log_index": t.log_index, "lo": t.lo, "hi": t.hi,
                                           "n_sales": t.n_sales}) for t in trends.values()], ignore_index=True)
    market_area = frame["market_area"].to_numpy()
    factor = adjustment_factors(trends, months, market_area)
    trend_area = np.where(np.isin(market_area, list(trends)), market_area, "jurisdiction")
    adjusted_frame = pd.DataFrame({"sale_id": frame["sale_id"], "parcel_id": frame["parcel_id"],
                                   "month_offset": months.astype(int), "trend_area": trend_area,
                                   "factor": factor, "adjusted_price": frame["sale_price"].to_numpy() * factor})
    store.insert("insert_market_trend", trend_frame)
    store.insert("insert_adjusted_sales", adjusted_frame)
