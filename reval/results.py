"""The typed results the core's steps return (and `--json` prints): declared here, light to import, so the
service layer and the app can name them without loading the steps' libraries."""
from __future__ import annotations

from typing import Any, Literal, TypedDict

from reval.states import BatchState, SaleChoice


class ImportSummary(TypedDict):
    """What an import did, as `reval import --json` prints it."""

    changed: bool
    parcels: int
    sales: int
    segments: int
    market_areas: int
    files: dict[str, str]


class SegmentSales(TypedDict):
    segment: str
    qualified: int
    excluded: int
    excluded_by_reason: dict[str, int]


class SalesCounts(TypedDict):
    """Qualified and excluded sales, in all and per segment, with each exclusion's reason."""

    qualified: int
    excluded: int
    excluded_by_reason: dict[str, int]
    segments: list[SegmentSales]
    trend_notes: list[str]     # no trend (sales span under two months), thin recent months, a wide band


class SaleDecision(TypedDict):
    """The analyst's decision on one sale and where it leaves the sale (qualified is None before `reval sales`)."""

    sale_id: str
    decision: SaleChoice
    reason: str
    parcels: list[str]
    segment: str
    qualified: bool | None
    qualification: str | None


class FitSummary(TypedDict):
    """What a run stored: its id, counts, seconds per stage and the whole jurisdiction's accuracy per model."""

    run_id: str
    sales: int
    parcels: int
    segments: int
    timings: dict[str, float]
    downweighted_sales: int
    accuracy: list[dict[str, Any]]


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


class ReportResult(TypedDict):
    """Where the ratio-study report was written and what it holds (reval/report/study_report.py)."""

    path: str
    values: str
    run_id: str | None
    figures: int
    studied: list[str]          # groupings studied (and stored) for the report because none was stored
    seconds: float
