"""Sales preparation: qualify sales by the config's rules, estimate the market trend and express every
qualified sale price at the valuation date. One transaction; every excluded sale keeps its reason."""
from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from reval.data.config import Config
from reval.data.dataset import SalesData, qualified_sales
from reval.errors import UserError
from reval.data.events import record_event
from reval.data.store import Store
from reval.data.market_trend import MarketTrend, adjustment_factors, estimate_trends, month_offsets
from reval.plain import Record
from reval.results import RepeatSale, SalesCounts, SegmentSales

Progress = Callable[[str, int, int], None]


@dataclass(frozen=True)
class SalesSummary:
    """Kept and excluded sales per segment and reason, and what to know about the market trend."""

    counts: pd.DataFrame   # segment, outcome, n
    trend_notes: tuple[str, ...] = ()
    repeats: tuple[Record, ...] = ()   # every sale of a parcel sold more than once in the window (repeat_sales)

    def as_dict(self) -> SalesCounts:
        by_reason = self.counts.groupby("outcome")["n"].sum()
        segments: list[SegmentSales] = []
        for segment, group in self.counts.groupby("segment", sort=True):
            outcomes = {str(k): int(v) for k, v in zip(group["outcome"], group["n"])}
            kept = outcomes.pop("qualified", 0)
            segments.append({"segment": str(segment), "qualified": kept, "excluded": sum(outcomes.values()),
                             "excluded_by_reason": outcomes})
        repeats: list[RepeatSale] = [
            {"parcel_id": r["parcel_id"], "segment": r["segment"], "sale_id": r["sale_id"],
             "sale_date": r["sale_date"].isoformat(), "sale_price": r["sale_price"], "n_sales": r["n_sales"],
             "latest": r["latest"], "qualified": r["qualified"], "reason": r["reason"]} for r in self.repeats]
        return {"qualified": int(by_reason.get("qualified", 0)),
                "excluded": int(by_reason.drop("qualified", errors="ignore").sum()),
                "excluded_by_reason": {str(k): int(v) for k, v in by_reason.drop("qualified", errors="ignore").items()},
                "segments": segments, "trend_notes": list(self.trend_notes), "repeat_sales": repeats}


def prepare_sales(store: Store, config: Config, progress: Progress | None = None) -> SalesSummary:
    """Qualify, estimate the trend and time-adjust, replacing the previous preparation atomically."""
    rules = config.sales
    with store.transaction() as con:
        store.run("clear_sales_preparation")
        store.run("qualify_sales", [config.sale_window_start, config.valuation_date,
                                    list(rules.validity_codes_kept) if rules.validity_codes_kept else None,
                                    rules.exclude_multi_parcel,
                                    list(rules.property_classes) if rules.property_classes else None,
                                    rules.price_min, rules.price_max, rules.repeat_sales == "latest",
                                    list(rules.require_features),
                                    list(config.classes.land_schedule + config.classes.not_valued)])
        if progress:
            progress("qualifying sales", 1, 2)
        data = qualified_sales(store)
        if len(data.frame) == 0:
            raise UserError("No sale qualifies under the [sales] rules in reval.toml; nothing was changed. "
                            "Check validity_codes_kept, the sale window and the price bounds.")
        notes = _time_adjust(store, config, data)
        if progress:
            progress("qualifying sales", 2, 2)
        summary = SalesSummary(store.frame("sales_counts"), notes, repeat_sales(store, config))
        counts = summary.as_dict()
        record_event(con, "sales", {"qualified": counts["qualified"], "excluded_by_reason": counts["excluded_by_reason"],
                                    "trend_notes": counts["trend_notes"], "config_sha256": config.sha256})
    return summary


def stored_summary(store: Store, config: Config) -> SalesSummary:
    """The stored qualification counts, the trend notes of the last sales step and the repeat sales."""
    events = store.rows("latest_sales_event")
    notes = tuple(json.loads(events[0][0]).get("trend_notes", [])) if events else ()
    return SalesSummary(store.frame("sales_counts"), notes, repeat_sales(store, config))


def repeat_sales(store: Store, config: Config) -> tuple[Record, ...]:
    """Every sale of a parcel sold more than once in the sale window, with what the sales step made of it; also
    left in the temporary table repeat_sales for `reval check` (reval.data.check)."""
    return tuple(store.records("sales_repeats", {"start": config.sale_window_start,
                                                 "valuation_date": config.valuation_date}))


def trend_factors(config: Config, data: SalesData, rows: np.ndarray) -> tuple[np.ndarray, dict[str, MarketTrend]]:
    """The market trend estimated on `rows` of the qualified sales (with the config's settings), and the
    factor taking every sale's price to the valuation date by it. Used for the stored adjustment (the rows
    the model fits) and, inside each fold, for the out-of-fold figures (the fold's training rows)."""
    frame = data.frame
    months = month_offsets(frame["sale_date"].to_numpy(dtype="datetime64[D]"), config.valuation_date)
    market_area = frame["market_area"].to_numpy()
    trends = estimate_trends(months[rows], np.log(data.fit_price("sale_price")[rows]), data.X[rows], data.features,
                             frame["segment"].to_numpy()[rows], market_area[rows],
                             window_months=config.sale_window_months, by_market_area=config.time.by_market_area,
                             min_sales_market_area=config.time.min_sales_market_area, n_basis=config.time.n_basis)
    return adjustment_factors(trends, months, market_area), trends


def _time_adjust(store: Store, config: Config, data: SalesData) -> tuple[str, ...]:
    """Estimate the trend on the sales the model fits, store it and every qualified sale's adjusted price;
    return the trend's notes."""
    frame = data.frame
    factor, trends = trend_factors(config, data, data.in_fit(config.sales.multi_parcel_in_fit))
    months = month_offsets(frame["sale_date"].to_numpy(dtype="datetime64[D]"), config.valuation_date)
    trend_frame = pd.concat([pd.DataFrame({"area": t.area, "month_offset": t.months.astype(int),
                                           "log_index": t.log_index, "lo": t.lo, "hi": t.hi,
                                           "n_sales": t.n_sales}) for t in trends.values()], ignore_index=True)
    market_area = frame["market_area"].to_numpy()
    trend_area = np.where(np.isin(market_area, list(trends)), market_area, "jurisdiction")
    adjusted_frame = pd.DataFrame({"sale_id": frame["sale_id"], "parcel_id": frame["parcel_id"],
                                   "month_offset": months, "trend_area": trend_area,
                                   "factor": factor, "adjusted_price": frame["sale_price"].to_numpy() * factor})
    store.insert("insert_market_trend", trend_frame)
    store.insert("insert_adjusted_sales", adjusted_frame)
    return tuple(note for t in trends.values() for note in t.notes)
