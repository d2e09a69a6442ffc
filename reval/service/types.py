"""The typed results of every action and the data of every screen: what the command line prints (`--json`)
and what the app shows. Results the core produces are declared beside their producer and re-exported here,
so the front-ends import their types from one place."""
from __future__ import annotations

from typing import Any, TypedDict

from reval.plain import Record
from reval.results import (AllPassing, Decision, ExportResult, FitSummary, ImportSummary, ReportResult, ReviewReport, SaleDecision,
                           SalesCounts, SegmentReview, StagePlan, StageResult, StandingDecision)
from reval.roll.batch_states import SegmentBatches
from reval.roll.split import ValueSplit
from reval.states import BatchState, ValuesSource
from reval.stats.stored import StudyGroup, StudyResult

__all__ = ["AllPassing", "BatchStates", "CompareResult", "Curve", "Decision", "DemoSummary", "Equity", "Event", "EventLog",
           "ExportResult", "FitSummary", "ImportSummary", "Overview", "OverviewRow", "ParcelDetail", "Record",
           "ReportResult", "ReviewReport", "SaleDecision", "SalesCounts", "SalesPage", "SegmentDetail", "StagePlan", "StageResult",
           "StandingDecision", "StatCell", "StudyGroup",
           "StudyResult", "ValueChange", "ValueSplit"]


class DemoSummary(TypedDict):
    jurisdiction: str
    folder: str
    parcels: int
    sales: int
    segments: int
    market_areas: int
    steps: list[str]


class CompareResult(TypedDict):
    """Every model's out-of-fold accuracy on the same sales and folds, per segment and overall (rows carry the
    model id and its display name), and each tree reference's permutation importance (rows per model)."""

    run_id: str
    models: list[str]
    model_names: dict[str, str]
    rows: list[Record]
    importance: list[Record]


class Event(TypedDict):
    event_id: int
    event_time: Any
    who: str
    kind: str
    segment: str | None
    run_id: str | None
    detail: dict[str, Any]


class EventLog(TypedDict):
    segment: str | None
    events: list[Event]


class BatchStates(TypedDict):
    segments: list[SegmentBatches]


# ---- the app's screens -----------------------------------------------------------------------------------------

class StatCell(TypedDict):
    """One statistic of one segment as the app shows it: value, verdict, limit and confidence interval."""

    value: float | None
    status: str | None
    limit: str | None
    ci: list[float | None] | None


class OverviewRow(TypedDict):
    """One segment on the overview: counts and model kind (from SQL), statistics with verdicts, state."""

    segment: str
    market_area: str
    parcels: int
    sales: int
    kind: str | None
    borrowed_share: float | None
    reason: str | None
    value_change: float | None
    stats: dict[str, StatCell]   # by statistic: median_ratio, cod, prd, prb
    n: int
    failing: bool                # cannot be approved without a note: a verdict not a pass, or no study
    state: BatchState | None
    batches: str                 # certified and open batch side by side, e.g. "approved, run 3 · run 4 pending"


class Overview(TypedDict):
    jurisdiction: str
    valuation_date: str
    folder: str
    run_id: str | None
    stats_source: ValuesSource | None
    stats_header: str
    segments: list[OverviewRow]
    market_areas: list[str]
    states: list[str]


class Curve(TypedDict):
    """A feature's curve in a segment on a grid, its band, its parent's curve and where the data lie."""

    feature: str
    kind: str
    levels: list[str]
    x: list[float]
    effect: list[float]
    lo: list[float]
    hi: list[float]
    parent_effect: list[float]
    data_bins: list[int]   # how many parcels lie in each bin of x (levels for a non-continuous feature)


class Equity(TypedDict):
    stats: dict[str, StatCell]
    n: int
    model_values: bool
    n_trimmed: int
    confidence: float | None
    mean_ratio: float | None
    weighted_mean_ratio: float | None
    decile_median_ratios: list[float | None]         # by price decile
    proxy_decile_median_ratios: list[float | None]   # by decile of the IAAO value proxy
    price: list[float]
    ratio: list[float]


class ValueChange(TypedDict):
    sold: list[int]
    unsold: list[int]
    lo: float | None
    hi: float | None
    median_sold: float | None
    median_unsold: float | None
    n_sold: int
    n_unsold: int


class SegmentDetail(TypedDict):
    """Everything the drill-in shows for one segment; model parts are empty when there is no run."""

    segment: str
    market_area: str
    parcels: int
    sales: int
    run_id: str | None
    stats_header: str
    stats_short: str
    model: Record | None
    curves: list[Curve]
    interactions: list[Record]
    marginal_effects: list[Record]
    equity: Equity
    value_change: ValueChange | None
    reference_accuracy: list[Record]
    state: BatchState | None
    batches: str
    review: SegmentReview | None


class SalesPage(TypedDict):
    segment: str
    page: int
    pages: int
    total: int
    rows: list[Record]
    values: str
    downweighted: int


class ParcelDetail(TypedDict):
    """One parcel: its identity, features, estimate and value split, roll rows, sales and flags."""

    parcel_id: str
    segment: str
    market_area: str
    property_class: str
    prior_value: float | None
    latitude: float | None
    longitude: float | None
    run_id: str | None
    features: list[Record]
    estimate: Record | None
    split: ValueSplit | None
    roll: list[Record]
    value_change: float | None
    sales: list[Record]
    flags: list[str]
