"""Comparable sales adjusted by the model: the sales comparison approach with the model supplying the adjustments.

The method is the trade's sales comparison approach: value a subject from the prices of similar sold properties,
each adjusted for its differences from the subject, set out as an adjustment grid (one row per characteristic,
one column per comparable, with net and gross adjustment) and reconciled to an indicated value, giving most
weight to the comparables that need the least adjustment (Appraisal Institute, "The Appraisal of Real Estate",
the chapters on the sales comparison approach; IAAO Standard on Mass Appraisal of Real Property (2017), on the
sales comparison approach in mass appraisal and adjustments derived from the market by regression; The Appraisal
Foundation, APB Valuation Advisory 4 "Identifying Comparable Properties" (2013), on similarity, market area and
recency. Cited from memory, not quoted).

Here the adjustments come from the run's model, which is additive on the log scale: a parcel's log value is a
base plus one contribution per feature (and per selected interaction). A comparable's adjustment for one row is
the subject's contribution minus the comparable's; the location row is the difference of the bases (zero within
a segment). So a comparable's adjusted price is its time-adjusted price x exp(subject's log value - comparable's
log value), and the rows, turned into currency by the log-mean split of reval.roll.split, add up to the net
adjustment exactly. The adjusted prices are then the subject's model value divided by each comparable's
in-sample sales ratio: the grid shows, in the trade's form, how well the model reproduces the nearest sales.

Similarity is what the model says matters: the Euclidean distance between the two parcels' contributions (log
units), plus the [comparables] weights for a sale outside the subject's segment or market area and for the
sale's age. Candidates (SQL: sql/queries/comparables_candidates.sql) are qualified one-parcel sales of the same
property class, other than the subject's own; the subject's characteristics are assumed to describe each sold
parcel at its sale (common practice when the data hold one set of characteristics per parcel).
"""
from __future__ import annotations

import math

import numpy as np

from reval.data.config import Config
from reval.data.store import Store
from reval.errors import UserError
from reval.model import BASE_TERM
from reval.plain import Record
from reval.results import ComparableGrid, ComparableSale, GridRow
from reval.roll.split import value_split
from reval.states import SearchArea

TIERS: tuple[SearchArea, ...] = ("segment", "market_area", "jurisdiction")
LOCATION = "location"          # the grid's row for the difference of the segments' bases
GROSS_FLOOR = 0.05             # a comparable's reconciliation weight is 1 / max(gross share, this): our choice
METHOD = ("Sales comparison approach; each row's adjustment is the subject's part minus the sale's, by the "
          "model; the indicated value is the median weighted by 1 / gross adjustment.")


# ---- the arithmetic, vectorised over candidates ---------------------------------------------------------------

def log_mean(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The logarithmic mean (a - b) / (ln a - ln b) of positive numbers, a where they are equal."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    gap = np.log(a) - np.log(b)
    same = np.abs(gap) < 1e-12
    return np.where(same, a, (a - b) / np.where(same, 1.0, gap))


def adjusted_prices(prices: np.ndarray, logs: np.ndarray) -> np.ndarray:
    """Each candidate's time-adjusted price times exp(the sum of its rows' log adjustments)."""
    return np.asarray(prices, dtype=float) * np.exp(np.asarray(logs).sum(axis=1))


def gross_shares(prices: np.ndarray, logs: np.ndarray) -> np.ndarray:
    """Gross adjustment / time-adjusted price: the rows' absolute currency amounts (log-mean split) summed."""
    prices = np.asarray(prices, dtype=float)
    return log_mean(adjusted_prices(prices, logs), prices) * np.abs(logs).sum(axis=1) / prices


def distances(subject: np.ndarray, candidates: np.ndarray, other_segment: np.ndarray, other_area: np.ndarray,
              age_years: np.ndarray, segment_weight: float, area_weight: float, age_weight: float) -> np.ndarray:
    """Distance on the model's contributions (log units) plus the weights for location and the sale's age."""
    gap = np.sqrt(((candidates - subject) ** 2).sum(axis=1))
    return gap + segment_weight * other_segment + area_weight * other_area + age_weight * age_years


def choose(distance: np.ndarray, over_max: np.ndarray, k: int) -> np.ndarray:
    """The k nearest candidates, those within the maximum gross adjustment before any beyond it."""
    return np.lexsort((distance, over_max))[:k]


def weighted_median(values: np.ndarray, weights: np.ndarray) -> float:
    """The lower weighted median: the smallest value at which the sorted weights reach half their total."""
    order = np.argsort(values, kind="stable")
    cumulative = np.cumsum(np.asarray(weights, dtype=float)[order])
    return float(np.asarray(values, dtype=float)[order][np.searchsorted(cumulative, cumulative[-1] / 2)])


# ---- one parcel's grid -------------------------------------------------------------------------------------------

def _features(store: Store, parcel_ids: list[str]) -> dict[str, dict[str, str]]:
    """Each parcel's feature values as shown in a grid: the level's label, or the number."""
    shown: dict[str, dict[str, str]] = {}
    for r in store.records("comparables_features", [parcel_ids]):
        text = r["label"] if r["label"] is not None else "–" if r["value"] is None else f"{r['value']:.10g}"
        shown.setdefault(r["parcel_id"], {})[r["name"]] = text
    return shown


def _row_value(term: str, row: Record, features: dict[str, str]) -> str:
    if term == LOCATION:
        return str(row["segment"])
    return features.get(term, "")


def comparable_grid(store: Store, config: Config, run_id: str, parcel_id: str) -> ComparableGrid:
    """The k comparable sales of one parcel adjusted to it by run `run_id`'s model, as an adjustment grid with
    the value range they indicate beside the model value."""
    settings = config.comparables
    rows = store.records("comparables_candidates",
                         [run_id, parcel_id, TIERS.index(settings.widest), settings.widen_below,
                          settings.max_age_months, settings.min_fit_weight])
    if not rows or rows[0]["tier"] != -1:
        raise UserError(f"Parcel {parcel_id!r} has no value in run {run_id}: no comparables can be adjusted to it.")
    subject, found = rows[0], rows[1:]
    terms = [t for t in subject["terms"] if t != BASE_TERM]
    base_at = subject["terms"].index(BASE_TERM)
    parts = np.array([r["parts"] for r in rows], dtype=float)
    base, contributions = parts[:, base_at], np.delete(parts, base_at, axis=1)
    model_value = math.exp(subject["log_value"])
    grid: ComparableGrid = {
        "parcel_id": parcel_id, "run_id": run_id, "searched": TIERS[subject["reach"]], "candidates": len(found),
        "k": settings.k, "max_gross_adjustment": settings.max_gross_adjustment, "model_value": round(model_value),
        "comparables": [], "rows": [], "indicated_value": None, "low": None, "high": None, "brackets": None,
        "method": METHOD}
    if not found:
        return grid
    prices = np.array([r["adjusted_price"] for r in found], dtype=float)
    logs = np.column_stack([contributions[0] - contributions[1:], base[0] - base[1:]])  # rows x (terms, location)
    gross = gross_shares(prices, logs)
    over = gross > settings.max_gross_adjustment
    distance = distances(contributions[0], contributions[1:],
                         np.array([r["segment"] != subject["segment"] for r in found]),
                         np.array([r["market_area"] != subject["market_area"] for r in found]),
                         np.array([r["age_months"] for r in found], dtype=float) / 12.0,
                         settings.segment_weight, settings.market_area_weight, settings.age_weight)
    picked = choose(distance, over, settings.k)
    return _fill(store, grid, subject, [found[i] for i in picked], terms, logs[picked], gross[picked],
                 over[picked], distance[picked])


def _fill(store: Store, grid: ComparableGrid, subject: Record, chosen: list[Record], terms: list[str],
          logs: np.ndarray, gross: np.ndarray, over: np.ndarray, distance: np.ndarray) -> ComparableGrid:
    """The grid's columns (one per chosen sale, split to whole currency units) and rows, and the indicated range."""
    names = [*terms, LOCATION]
    splits = [value_split(math.log(r["adjusted_price"]), dict(zip(names, map(float, row))))
              for r, row in zip(chosen, logs)]
    weights = 1.0 / np.maximum(gross, GROSS_FLOOR)
    for r, split, g, beyond, d, w in zip(chosen, splits, gross, over, distance, weights / weights.sum()):
        price, adjusted = split["base"], split["value"]
        grid["comparables"].append(ComparableSale(
            sale_id=r["sale_id"], parcel_id=r["parcel_id"], segment=r["segment"], market_area=r["market_area"],
            sale_date=r["sale_date"].isoformat(), sale_price=round(r["sale_price"]), time_adjusted_price=price,
            model_value=round(math.exp(r["log_value"])), adjusted_price=adjusted, net_adjustment=adjusted - price,
            net_percent=(adjusted - price) / price,
            gross_percent=sum(abs(p["currency"]) for p in split["parts"]) / price,
            over_max_gross=bool(beyond), distance=float(d), age_months=float(r["age_months"]), weight=float(w)))
    features = _features(store, [subject["parcel_id"], *(r["parcel_id"] for r in chosen)])
    subject_row = {"segment": subject["segment"]}
    for i, term in enumerate(names):
        amounts = [s["parts"][i]["currency"] for s in splits]
        grid["rows"].append(GridRow(
            term=term, subject=_row_value(term, subject_row, features.get(subject["parcel_id"], {})),
            values=[_row_value(term, r, features.get(r["parcel_id"], {})) for r in chosen],
            adjustments=amounts, percents=[a / c["time_adjusted_price"] for a, c in zip(amounts, grid["comparables"])]))
    adjusted = np.array([c["adjusted_price"] for c in grid["comparables"]], dtype=float)
    low, high = int(adjusted.min()), int(adjusted.max())
    grid["indicated_value"] = round(weighted_median(adjusted, weights))
    grid["low"], grid["high"] = low, high
    grid["brackets"] = low <= grid["model_value"] <= high
    return grid
