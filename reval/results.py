"""The typed results the core's steps return (and `--json` prints): declared here, light to import, so the
service layer and the app can name them without loading the steps' libraries."""
from __future__ import annotations

from typing import Any, Literal, TypedDict

from reval.states import BatchState, SaleChoice, SearchArea


class ImportSummary(TypedDict):
    """What an import did, as `reval import --json` prints it."""

    changed: bool
    parcels: int
    sales: int
    segments: int
    market_areas: int
    files: dict[str, str]
    filled_in: dict[str, int]    # per feature: parcels whose value is missing, which the model fills in


class SegmentSales(TypedDict):
    segment: str
    qualified: int
    excluded: int
    excluded_by_reason: dict[str, int]


class RepeatSale(TypedDict):
    """One sale of a parcel sold more than once in the sale window; `latest` is the one [sales] repeat_sales =
    "latest" keeps (if it passes the other rules), `qualified` and `reason` what the sales step made of it."""

    parcel_id: str
    segment: str
    sale_id: str
    sale_date: str
    sale_price: float
    n_sales: int
    latest: bool
    qualified: bool | None
    reason: str | None


class SalesCounts(TypedDict):
    """Qualified and excluded sales, in all and per segment, with each exclusion's reason."""

    qualified: int
    excluded: int
    excluded_by_reason: dict[str, int]
    segments: list[SegmentSales]
    trend_notes: list[str]     # no trend (sales span under two months), thin recent months, a wide band
    repeat_sales: list[RepeatSale]


class SaleDecision(TypedDict):
    """The analyst's decision on one sale and where it leaves the sale (qualified is None before `reval sales`)."""

    sale_id: str
    decision: SaleChoice
    reason: str
    parcels: list[str]
    segment: str
    qualified: bool | None
    qualification: str | None


class FilledIn(TypedDict):
    """What a run filled in for one feature: how many parcels lacked it and the value they took (shown as text:
    a level's name, or the number)."""

    parcels: int
    value: str
class OutdatedBatch(TypedDict):
    batch_id: int
    state: str
    run_id: str


class OverrideResult(TypedDict):
    """An override set or removed: the parcel, the override now standing (None once removed), the one it replaced,
    the model's value beside it, and the segment's batches that now need a new value step."""

    parcel_id: str
    segment: str
    action: str                       # "set" | "removed"
    override: dict[str, Any] | None   # value, reason, note, set_at, who
    previous: dict[str, Any] | None
    model_value: float | None         # the newest run's estimate, when there is a run
    run_id: str | None
    outdated: list[OutdatedBatch]


class CorrectionResult(TypedDict):
    """A data correction of one parcel: features before and after, its estimate in the run before and after
    (no refit), and the segment's batches that now need a new value step."""

    parcel_id: str
    segment: str
    run_id: str
    changes: list[dict[str, Any]]     # feature, old, new (as written: levels by name)
    old_value: float
    new_value: float
    note: str
    sales_in_fit: int                 # the parcel's sales the run was fitted on (with the old data)
    outdated: list[OutdatedBatch]


class FitSummary(TypedDict):
    """What a run stored: its id, counts, seconds per stage and the whole jurisdiction's accuracy per model."""

    run_id: str
    sales: int
    parcels: int
    segments: int
    timings: dict[str, float]
    downweighted_sales: int
    accuracy: list[dict[str, Any]]
    filled_in: dict[str, FilledIn]   # per feature: parcels whose missing value the model filled in, and with what


class ParcelChanges(TypedDict):
    n: int
    examples: list[str]    # up to 3 parcel ids


class SegmentSalesChange(TypedDict):
    segment: str
    n_then: int            # qualified sales when the run was fitted
    n_now: int


class DataChanges(TypedDict):
    """How the current import differs from a run's data: parcels by kind of change ('added', 'removed',
    'changed'; 'unknown' for a run made before fingerprints) and segments whose sales changed."""

    run_id: str
    parcels: dict[str, ParcelChanges]
    sales: list[SegmentSalesChange]


class StagedBatch(TypedDict):
    segment: str
    batch_id: int
    n_parcels: int
    replaced_batch_id: int | None
    replaced_state: str | None


class LandScheduleUsed(TypedDict):
    lot_feature: str
    sha256: str


class StandingDecision(TypedDict):
    """A held or approved batch that a re-stage of its segment would set aside, and what would happen to it."""

    segment: str
    batch_id: int
    run_id: str
    state: str
    note: str | None
    on_restage: str


class StagePlan(TypedDict):
    """What `reval value` would do (the app's confirmation): segments to stage, already staged from this run,
    decisions kept standing, and decisions a re-stage with replace sets aside."""

    run_id: str
    stage: list[str]
    unchanged: list[str]
    kept: list[StandingDecision]
    set_aside: list[StandingDecision]


class StageResult(TypedDict):
    """What `reval value` staged: the run, the new batches (and what each replaced), the segments left as
    they were (already staged from this run, or kept for a standing decision), the flag counts."""

    run_id: str
    staged: list[StagedBatch]
    unchanged: list[str]
    kept: list[StandingDecision]
    land_schedule: LandScheduleUsed | None
    flags: dict[str, int]


class SalesChasing(TypedDict):
    """The sales-chasing check of one segment (reval/roll/review.py): sold vs unsold value changes in level
    and distribution, the roll's values on the sales against out-of-fold values, the reasons to flag."""

    n_sold: int
    n_unsold: int
    median_change_sold: float | None
    median_change_unsold: float | None
    median_gap: float | None
    u_statistic: float | None
    p_value: float | None              # Mann-Whitney U, two-sided
    ks_statistic: float | None         # Kolmogorov-Smirnov D
    ks_p_value: float | None
    iqr_change_sold: float | None
    iqr_change_unsold: float | None
    n_sales: int                       # qualified sales of the segment's parcels
    roll_cod: float | None             # COD of roll value / time-adjusted price
    oof_cod: float | None              # COD of out-of-fold value / time-adjusted price, same sales
    cod_share: float | None            # roll_cod / oof_cod
    cod_min: float                     # the low-COD limit applied
    n_at_price: int | None             # roll values within the band of their own sale price
    expected_at_price: float | None    # how many out-of-fold values put there
    at_price_p_value: float | None     # one-sided binomial
    reasons: list[str]
    rule: str
    status: Literal["pass", "flagged", "too_few_sales"]
    flagged: bool


class SegmentReview(TypedDict):
    """One segment's batch under review: totals, value-change quantiles, large changes, the chasing check."""

    segment: str
    batch_id: int
    run_id: str
    state: str
    note: str | None
    n_parcels: int
    n_with_prior: int
    totals: dict[str, float | None]
    total_change: float | None
    change_ratio_quantiles: dict[str, float | None] | None
    n_beyond_threshold: int
    beyond_threshold: list[dict[str, Any]]
    n_downweighted: int
    downweighted: list[dict[str, Any]]
    sales_chasing: SalesChasing
    flags: dict[str, int]        # parcels per kind of flag (reval/roll/flags.py): "filled", "beyond", ...
    flag_codes: dict[str, int]   # parcels per flag code: "filled:living_area", "beyond:lot_size", ...
    blockers: list[str]          # why the batch cannot be approved whatever its statistics (rows without a value)


class ReviewReport(TypedDict):
    threshold: float
    listed_per_segment: int
    segments: list[SegmentReview]


class Decision(TypedDict, total=False):
    """The outcome of approve, hold or revoke: the batch, its new state, the note and the statistics judged."""

    segment: str
    batch_id: int
    run_id: str
    state: BatchState
    note: str | None
    statistics: dict[str, Any]
    override: bool
    failed: list[str]
    superseded: list[int]


class LeftSegment(TypedDict):
    """A segment `approve --all-passing` left as it was, and why."""

    segment: str
    reason: str


class AllPassing(TypedDict):
    """The outcome of approving every passing segment at once: the approvals and the segments left."""

    approved: list[Decision]
    left: list[LeftSegment]


class PendingBatch(TypedDict):
    """A newer open batch of a certified segment, left out of an export: its values are not the roll's."""

    segment: str
    batch_id: int
    run_id: str
    state: str


class Manifest(TypedDict):
    """What travels beside a roll file: its rows, hash, per-segment totals (each with the run and batch its
    values come from), runs, newer batches left out, and provenance."""

    file: str
    rows: int
    sha256: str
    segments: list[dict[str, Any]]
    run_ids: list[str]
    partial: bool
    not_approved: list[str]
    pending_newer_batches: list[str]
    pending_batches: list[PendingBatch]
    config_sha256: str
    who: str
    when: str
    text_cells: str


class ExportResult(Manifest):
    path: str
    manifest: str


class ComparableSale(TypedDict):
    """One comparable sale in whole currency units: its time-adjusted price, the model's net adjustment to the
    subject and the adjusted price (price + net = adjusted), gross and net as shares of the price, its distance
    to the subject and its share in the reconciliation."""

    sale_id: str
    parcel_id: str
    segment: str
    market_area: str
    sale_date: str
    sale_price: int
    time_adjusted_price: int
    model_value: int
    adjusted_price: int
    net_adjustment: int
    net_percent: float
    gross_percent: float
    over_max_gross: bool
    distance: float
    age_months: float
    weight: float


class GridRow(TypedDict):
    """One row of the adjustment grid: a feature (or interaction, or the location), the subject's value, each
    comparable's value and its adjustment in currency and as a share of its time-adjusted price."""

    term: str
    subject: str
    values: list[str]
    adjustments: list[int]
    percents: list[float]


class ComparableGrid(TypedDict):
    """A parcel's comparable sales adjusted by a run's model, and the range they indicate beside its model value
    (the rows of each column add up to its net adjustment)."""

    parcel_id: str
    run_id: str
    searched: SearchArea
    candidates: int
    k: int
    max_gross_adjustment: float
    model_value: int
    comparables: list[ComparableSale]
    rows: list[GridRow]
    indicated_value: int | None
    low: int | None
    high: int | None
    brackets: bool | None
    method: str


class ReportResult(TypedDict):
    """Where the ratio-study report was written and what it holds (reval/report/study_report.py)."""

    path: str
    values: str
    run_id: str | None
    figures: int
    studied: list[str]          # groupings studied (and stored) for the report because none was stored
    seconds: float
class CheckNotRun(TypedDict):
    """A check that could not run on this project, and why (e.g. no feature holds the number of bathrooms)."""

    check: str
    reason: str


class CheckSegment(TypedDict):
    """One segment in the data-quality check: its parcels, those sold (whose values the sold range comes from)
    and its problems per check (checks without a problem left out)."""

    segment: str
    parcels: int
    sold_parcels: int
    problems: int
    counts: dict[str, int]


class CheckReport(TypedDict):
    """`reval check`: problems per segment and check, the checks with what each lists, those that could not run,
    and the CSV of every row when one was asked for."""

    valuation_date: str
    sale_window: list[str]
    basis: str                     # the sales the sold ranges come from: qualified, or all in the window
    checks: dict[str, str]
    segments: list[CheckSegment]
    totals: dict[str, int]
    not_run: list[CheckNotRun]
    csv: dict[str, Any] | None     # {"path": ..., "rows": ...}


class CheckPage(TypedDict):
    """One page of the check's rows (parcel_id, sale_id, segment, code, feature, value, problem) with the filters
    and sort that chose it."""

    page: int
    pages: int
    total: int
    segment: str | None
    code: str | None
    sort: str
    rows: list[dict[str, Any]]
