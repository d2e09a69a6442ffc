"""Market trend over the sale window: a hedonic monthly price index with a confidence band.

Sale prices from two or three years are expressed at the valuation date by a smooth index of
the market level by month, estimated from qualified sales while controlling for what sold:

    log price = intercept + c(month) + segment effect + sum of feature main-effect curves.

c is a cubic P-spline in the month number with a second-difference penalty (Eilers & Marx 1996),
on equally spaced knots over the whole window up to the valuation month, so the curve reaches
month 0 even when nothing sold in it (the penalty's null space is a straight line, so the curve
continues the recent slope). Controlling for features keeps a drift in what sold (bigger houses
later in the window, say) out of the index, which a monthly median of prices would absorb.

Segment effects are a ridge-penalised indicator block (a random-effect-like intercept per
segment); all penalties, the segment ridge included, are chosen by GCV in `PenalisedLS`.
The band is pointwise for c(m) - c(0), from the Bayesian covariance of the penalised fit
(Wood 2017, section 6.10) and the difference of the month's and month 0's basis rows.

A sale is placed by its day: its month offset is fractional (the index is stored per whole month and
interpolated between). Sales spanning under two months carry no trend: no index is estimated and every
factor is 1 (said in a note). When the months before the valuation date hold few sales the index there
rests on the spline's shape (the penalty continues the earlier slope, which flattens a turn), so a note
says so with the band's width; so does a band wider than WIDE_BAND anywhere.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np
import pandas as pd
from scipy.stats import norm

from reval.model.design import Block, DesignSpec, Feature, sum_to_zero_basis
from reval.model.penalised import PenalisedLS
from reval.model.splines import bspline_basis, difference_penalty

JURISDICTION = "jurisdiction"
MONTH_TERM = "(sale month)"
SEGMENT_TERM = "(segment)"
MIN_SPAN_MONTHS = 2.0   # sales spanning less carry no trend (factor 1)
RECENT_MONTHS = 6       # the months before the valuation date whose sales anchor the index
THIN_SHARE = 0.5        # recent months are thin below this share of an even spread of the sales (our choice)
WIDE_BAND = 0.10        # a band half-width above this (log units, about +/-10 %) is worth a note (our choice)


@dataclass(frozen=True)
class MarketTrend:
    """Estimated log market level by month relative to the valuation month, with a pointwise band."""

    area: str
    months: np.ndarray  # month offsets -window .. 0
    log_index: np.ndarray  # c(m) - c(0)
    lo: np.ndarray
    hi: np.ndarray
    n_sales: int
    notes: tuple[str, ...] = ()  # no trend, thin recent months, a wide band

    def factor(self, month_offsets: np.ndarray) -> np.ndarray:
        """Multiplier taking a price of that month to the valuation month; months beyond the range clamp to the ends."""
        m = np.asarray(month_offsets, dtype=float)
        return np.exp(-np.interp(m, self.months, self.log_index))


def _month_position(days: np.ndarray) -> np.ndarray:
    """A date as months since 1970-01 plus the fraction of its month gone by (the 1st is .0)."""
    month = days.astype("datetime64[M]")
    start = month.astype("datetime64[D]")
    length = (month + 1).astype("datetime64[D]") - start
    return month.astype(np.int64) + (days - start).astype(np.int64) / length.astype(np.int64)


def month_offsets(sale_dates: np.ndarray, valuation_date: dt.date) -> np.ndarray:
    """Months from the valuation date to each sale, by day (negative before it): whole calendar months plus
    the fraction of the month, so the 1st of a month is a whole number of months from a valuation date on
    the 1st, and the 16th of a 31-day month half a month on."""
    days = np.asarray(sale_dates, dtype="datetime64[D]")
    return _month_position(days) - _month_position(np.array([np.datetime64(valuation_date, "D")]))[0]


def _month_block(month: np.ndarray, window_months: int, n_basis: int) -> tuple[Block, np.ndarray]:
    """Centred P-spline block in the month over [-window, 0], and its constraint basis Z."""
    basis = bspline_basis(month, -window_months, 0.0, n_basis)
    z = sum_to_zero_basis(basis.mean(axis=0))
    return Block(MONTH_TERM, basis @ z, (z.T @ difference_penalty(n_basis, 2) @ z,)), z


def _segment_block(segment: np.ndarray) -> Block:
    """One indicator per segment under a ridge penalty (its weight chosen with the others by GCV)."""
    _, codes = np.unique(np.asarray(segment), return_inverse=True)
    k = int(codes.max()) + 1
    cols = np.zeros((codes.size, k))
    cols[np.arange(codes.size), codes] = 1.0
    return Block(SEGMENT_TERM, cols, (np.eye(k),))


def _in_window(month_offset: np.ndarray, window_months: int) -> np.ndarray:
    m = np.asarray(month_offset)
    return (m >= -window_months) & (m <= 0)


def estimate_trend(
    month_offset: np.ndarray,
    log_price: np.ndarray,
    X: np.ndarray,
    features: Sequence[Feature],
    segment: np.ndarray,
    *,
    window_months: int,
    n_basis: int = 10,
    confidence: float = 0.95,
    area: str = JURISDICTION,
) -> MarketTrend:
    """Hedonic monthly index from the sales dated within `window_months` of the valuation month."""
    month_offset = np.asarray(month_offset)
    log_price = np.asarray(log_price, dtype=float)
    X = np.asarray(X, dtype=float)
    segment = np.asarray(segment)
    n = month_offset.shape[0]
    if log_price.shape != (n,) or segment.shape != (n,) or X.ndim != 2 or X.shape[0] != n:
        raise ValueError(f"month_offset, log_price, X and segment must have {n} rows each")
    if window_months < 1:
        raise ValueError(f"window_months must be at least 1, got {window_months}")
    keep = _in_window(month_offset, window_months)
    month = month_offset[keep].astype(float)
    months = np.arange(-window_months, 1)
    span = float(np.ptp(month)) if month.size else 0.0
    if span < MIN_SPAN_MONTHS:
        flat, unknown = np.zeros(months.size), np.full(months.size, np.nan)
        note = (f"{area}: the sales span {span:.1f} months (under {MIN_SPAN_MONTHS:g}): no market trend is estimated "
                "and prices are taken as at the valuation date (factor 1)")
        return MarketTrend(area, months, flat, unknown, unknown, int(keep.sum()), (note,))
    spec = DesignSpec.learn(X[keep], features, n_basis)
    month_block, z = _month_block(month, window_months, n_basis)
    blocks = [*spec.blocks(X[keep]), month_block, _segment_block(segment[keep])]
    model = PenalisedLS().fit(blocks, log_price[keep])

    rows = bspline_basis(months.astype(float), -window_months, 0.0, n_basis) @ z
    diff = rows - rows[-1]
    cols = model.slices_[MONTH_TERM]
    log_index = diff @ model.coef_[cols]
    se = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", diff, model.cov_[cols, cols], diff), 0.0))
    half = norm.ppf(0.5 + confidence / 2.0) * se
    notes = _notes(area, month, months, half, window_months, confidence)
    return MarketTrend(area, months, log_index, log_index - half, log_index + half, int(keep.sum()), notes)


def _notes(area: str, month: np.ndarray, months: np.ndarray, half: np.ndarray, window_months: int,
           confidence: float) -> tuple[str, ...]:
    """Why the index near the valuation date (or anywhere) deserves care, with the band's width."""
    widest = int(np.nanargmax(half)) if np.isfinite(half).any() else None
    band = ("" if widest is None else f"; its {confidence:.0%} band is ±{half[widest]:.3f} in log units "
            f"(±{100 * np.expm1(half[widest]):.0f} %) at {months[widest]} months")
    recent = int((month > -RECENT_MONTHS).sum())
    even = month.size * RECENT_MONTHS / window_months
    notes = []
    if recent < THIN_SHARE * even:
        notes.append(f"{area}: only {recent} of {month.size} sales fall in the {RECENT_MONTHS} months before the "
                     f"valuation date ({even:.0f} if spread evenly): the index there follows the curve's shape more "
                     f"than sales, and a recent turn of the market is flattened{band}")
    elif widest is not None and half[widest] > WIDE_BAND:
        notes.append(f"{area}: the market trend is uncertain{band}")
    return tuple(notes)


def estimate_trends(
    month_offset: np.ndarray,
    log_price: np.ndarray,
    X: np.ndarray,
    features: Sequence[Feature],
    segment: np.ndarray,
    market_area: np.ndarray,
    *,
    window_months: int,
    by_market_area: bool,
    min_sales_market_area: int,
    n_basis: int = 10,
    confidence: float = 0.95,
) -> dict[str, MarketTrend]:
    """The jurisdiction's trend, plus one per market area with enough in-window sales when asked.

    Sales with no market area (None or NaN) inform only the jurisdiction's trend.
    """
    month_offset = np.asarray(month_offset)
    log_price = np.asarray(log_price, dtype=float)
    X = np.asarray(X, dtype=float)
    segment = np.asarray(segment)
    market_area = np.asarray(market_area)
    trends = {JURISDICTION: estimate_trend(month_offset, log_price, X, features, segment, window_months=window_months,
                                           n_basis=n_basis, confidence=confidence)}
    if not by_market_area:
        return trends
    counts = pd.Series(market_area[_in_window(month_offset, window_months)]).value_counts()  # missing areas dropped
    for name in counts.index[counts.to_numpy() >= min_sales_market_area]:
        rows = market_area == name
        trends[str(name)] = estimate_trend(
            month_offset[rows], log_price[rows], X[rows], features, segment[rows], area=str(name),
            window_months=window_months, n_basis=n_basis, confidence=confidence,
        )
    return trends


def adjustment_factors(
    trends: Mapping[str, MarketTrend], month_offset: np.ndarray, market_area: np.ndarray
) -> np.ndarray:
    """Per sale: the factor of its market area's trend where one was estimated, else the jurisdiction's."""
    month_offset = np.asarray(month_offset)
    market_area = np.asarray(market_area)
    out = trends[JURISDICTION].factor(month_offset)
    for name, trend in trends.items():
        if name != JURISDICTION:
            rows = market_area == name
            out[rows] = trend.factor(month_offset[rows])
    return out
