"""The typed results of every action and the data of every screen: what the command line prints (`--json`)
and what the app shows. Results the core produces are declared beside their producer and re-exported here,
so the front-ends import their types from one place."""
from __future__ import annotations

from typing import Any, TypedDict

from reval.plain import Record
from reval.results import (AllPassing, CheckNotRun, CheckPage, CheckReport, CheckSegment, ComparableGrid,
                           ComparableSale, CorrectionResult, Decision, ExportResult, FitSummary, GridRow,
                           ImportSummary, OverrideResult, RepeatSale, ReportResult, ReviewReport, SaleDecision,
                           SalesCounts, SegmentReview, StagePlan, StageResult, StandingDecision)
from reval.roll.batch_states import SegmentBatches
from reval.roll.split import ValueSplit
from reval.states import BatchState, ValuesSource
from reval.stats.stored import StudyGroup, StudyResult

__all__ = ["AllPassing", "BatchStates", "CheckNotRun", "CheckPage", "CheckReport", "CheckSegment", "ComparableGrid",
           "ComparableSale", "CompareResult", "CorrectionResult", "Curve", "Decision", "DemoSummary", "Equity",
           "Event", "EventLog", "Explanation", "ExplanationPart", "ExportResult", "FitSummary", "GridRow",
           "ImportSummary", "OverrideResult", "Overview", "OverviewRow", "ParcelDetail", "ParcelReport",
           "ParcelValue", "Record", "RepeatSale", "ReportResult", "ReviewReport", "SaleDecision", "SalesCounts",
           "SalesPage", "SegmentDetail", "SegmentStatistics", "StagePlan", "StageResult", "StandingDecision",
           "StatCell", "StudyGroup", "StudyResult", "ValueChange", "ValueSplit"]


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
    model id and its display name), each tree reference's permutation importance (rows per model), and the structure
    our model chose by evidence (step, choice, criterion, candidate, value, chosen; reval/model/structure.py)."""

    run_id: str
    models: list[str]
    model_names: dict[str, str]
    rows: list[Record]
    importance: list[Record]
    structure: list[Record]


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
    failing: bool                # cannot be approved without a note: a verdict not a pass, no study, or a parcel without a value
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
    unit: str               # the config's unit of a continuous feature ("" when none)
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
    prior: list[float]      # prior and new value of a sample of the segment's parcels (the scatter)
    new: list[float]


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
    structure: str  # what the run's model chose by evidence, in words ("" before the first run)
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
    prior_value: float | None            # the prior market value
    prior_assessed_value: float | None
    prior_values: dict[str, Any]   # every prior_* column of the parcel (prior market value, prior assessed value)
    latitude: float | None
    longitude: float | None
    run_id: str | None
    features: list[Record]
    estimate: Record | None
    split: ValueSplit | None
    reference: list[Record]              # the segment's reference parcel the split is measured from
    roll: list[Record]
    value_change: float | None
    sales: list[Record]
    flags: list[str]
    override: Record | None        # the standing override (value, reason, note, set_at, who)
    override_reasons: list[str]    # the reason codes the config accepts


class ListColumn(TypedDict):
    """One column of a work list: the row key it shows, its header, how its values read (text, money, change,
    weight, date, time) and whether the list sorts by it."""

    key: str
    label: str
    format: str
    sortable: bool


class ListPage(TypedDict):
    """One page of a work list (reval.service.views.LISTS), filtered and sorted in SQL."""

    name: str
    title: str
    columns: list[ListColumn]
    rows: list[Record]
    total: int
    page: int
    pages: int
    page_size: int
    sort: str
    descending: bool
    segment: str | None
    text: str
    opens: str          # what Enter opens from a row: its parcel, else its segment (the log's rows without one)


class JobStep(TypedDict):
    """One step of the job as the app's steps screen shows it: its key, what it does, where the project is."""

    key: str
    step: str
    does: str
    status: str
    done: bool
class SegmentStatistics(TypedDict):
    """A segment's group in the stored study the app shows, with its verdict per statistic."""

    segment: str
    study_id: str
    values: str
    n: int
    median_ratio: float | None
    cod: float | None
    prd: float | None
    prb: float | None
    verdicts: dict[str, str]


class ParcelValue(TypedDict):
    """The value shown for a parcel: its newest roll row's market value when staged or certified, else the model's."""

    value: int | None
    source: str
    model_value: int | None
    roll: Record | None


class ExplanationPart(TypedDict):
    term: str
    currency: int
    percent: float   # share of the value
    log: float


class Explanation(TypedDict):
    """The model value split into its base and one currency part per feature, largest first (they add up to it)."""

    measured_from: str
    base: int
    value: int
    parts: list[ExplanationPart]


class ParcelReport(TypedDict):
    """Everything that defends one parcel's value (`reval parcel ID`, its report page and the app)."""

    jurisdiction: str
    valuation_date: str
    parcel_id: str
    segment: str
    market_area: str
    property_class: str
    run_id: str | None
    features: list[Record]
    value: ParcelValue
    prior_values: dict[str, Any]
    value_change: float | None
    flags: list[str]
    segment_statistics: SegmentStatistics | None
    explanation: Explanation | None
    comparables: ComparableGrid | None
    caution: str
    report: str | None   # the one-page report's file, when one was written
