"""Ratio-study statistics (IAAO Standard on Ratio Studies): level, uniformity and vertical equity.

Every statistic takes assessed values and sale prices (or their ratios) as 1-D arrays and has one
implementation here; `ratio_study` assembles them.  Definitions follow the IAAO Standard on Ratio
Studies (2013): ratio = assessed value / sale price; COD = 100 * mean |ratio - median| / median;
PRD = mean ratio / weighted mean ratio; PRB = slope of (ratio - median) / median on
log2(value proxy), value proxy = 0.5 * value / median + 0.5 * price (Section 9.2.7).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

DECILES = 10
# Resample indices drawn per chunk: bounds bootstrap memory to ~16 MB per (chunk x n) array whatever n is.
_BOOT_CHUNK_ELEMENTS = 1 << 21
_NAN_PAIR = (float("nan"), float("nan"))


@dataclass(frozen=True, eq=False)  # eq=False: the ndarray field makes field-wise == ambiguous
class RatioStudy:
    """Ratio-study statistics for one group of sales; CIs are (lo, hi), NaN where undefined."""

    n: int                                   # sales used (after trimming)
    n_trimmed: int
    median_ratio: float
    median_ratio_ci: tuple[float, float]     # binomial order statistics, see median_ci_ranks
    mean_ratio: float
    weighted_mean_ratio: float               # sum(values) / sum(prices)
    cod: float
    cod_ci: tuple[float, float]              # seeded percentile bootstrap
    prd: float
    prd_ci: tuple[float, float]              # seeded percentile bootstrap
    prb: float
    prb_ci: tuple[float, float]              # OLS standard error and Student t quantile
    decile_median_ratios: tuple[float, ...]  # median ratio by price decile; NaN where a decile is empty
    trimmed: np.ndarray                      # bool mask over the INPUT rows: True = trimmed as outlier
    # median ratio by decile of the IAAO value proxy (see value_proxy); sorting by price alone puts sales whose
    # price is high by chance in the top deciles, which exaggerates regressivity
    proxy_decile_median_ratios: tuple[float, ...] = ()


def _positive_finite(name: str, a: np.ndarray) -> np.ndarray:
    """Return `a` as a 1-D float64 array, or raise ValueError if any entry is NaN, infinite or <= 0."""
    arr = np.asarray(a, dtype=np.float64)
    if arr.ndim != 1:
        raise ValueError(f"{name} must be a 1-D array, got shape {arr.shape}")
    bad = np.flatnonzero(~(np.isfinite(arr) & (arr > 0)))
    if bad.size:
        raise ValueError(f"{name} must be finite and greater than zero: {bad.size} bad "
                         f"entr{'y' if bad.size == 1 else 'ies'}, first at row {bad[0]} (value {arr[bad[0]]!r})")
    return arr


def _pair(values: np.ndarray, prices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    v = _positive_finite("values", values)
    p = _positive_finite("prices", prices)
    if v.shape != p.shape:
        raise ValueError(f"values and prices differ in length ({v.size} vs {p.size})")
    return v, p


def _check_confidence(confidence: float) -> None:
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be strictly between 0 and 1, got {confidence!r}")


def _cod_rows(r: np.ndarray) -> np.ndarray:
    """COD along the last axis: 100 * mean absolute deviation from the median / median."""
    med = np.median(r, axis=-1, keepdims=True)
    return 100.0 * np.mean(np.abs(r - med), axis=-1) / med[..., 0]


def _weighted_mean_rows(v: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Weighted mean ratio along the last axis: total value / total price."""
    return v.sum(axis=-1) / p.sum(axis=-1)


def _prd_rows(r: np.ndarray, v: np.ndarray, p: np.ndarray) -> np.ndarray:
    """PRD along the last axis: mean ratio / weighted mean ratio."""
    return r.mean(axis=-1) / _weighted_mean_rows(v, p)


def ratios(values: np.ndarray, prices: np.ndarray) -> np.ndarray:
    """Assessment ratios value / price; ValueError on zero, negative or non-finite inputs."""
    v, p = _pair(values, prices)
    return v / p


def weighted_mean_ratio(values: np.ndarray, prices: np.ndarray) -> float:
    """Sum of values / sum of prices (the price-weighted mean ratio); NaN for no sales."""
    v, p = _pair(values, prices)
    return float(_weighted_mean_rows(v, p)) if v.size else float("nan")


def median_ci_ranks(n: int, confidence: float = 0.95) -> tuple[int, int] | None:
    """1-based ranks (k, n+1-k) of the distribution-free confidence interval for the median.

    Rule: the interval [x_(k), x_(n+1-k)] covers the population median with probability
    P(k <= B <= n-k) = 1 - 2 * P(B <= k-1), B ~ Binomial(n, 1/2) (Conover, Practical Nonparametric
    Statistics, 3rd ed., confidence interval for a quantile; the IAAO Standard on Ratio Studies
    uses the same order-statistic interval for the median, as recalled from memory).  We take the
    largest k, i.e. the narrowest symmetric pair, whose coverage is still >= confidence; no normal
    approximation, at any n.  None when even (x_(1), x_(n)) falls short (n <= 5 at 95%).
    """
    _check_confidence(confidence)
    if n < 1:
        return None
    k = np.arange(1, (n + 1) // 2 + 1)
    coverage = 1.0 - 2.0 * special.bdtr(k - 1, n, 0.5)
    ok = np.flatnonzero(coverage >= confidence)
    if ok.size == 0:
        return None
    k_star = int(k[ok[-1]])
    return k_star, n + 1 - k_star


def median_ci(ratios: np.ndarray, confidence: float = 0.95) -> tuple[float, float]:
    """Confidence interval for the median ratio from binomial order statistics (see median_ci_ranks)."""
    r = _positive_finite("ratios", ratios)
    ranks = median_ci_ranks(r.size, confidence)
    if ranks is None:
        return _NAN_PAIR
    lo, hi = ranks[0] - 1, ranks[1] - 1
    part = np.partition(r, (lo, hi))
    return float(part[lo]), float(part[hi])


def cod(ratios: np.ndarray) -> float:
    """Coefficient of dispersion: 100 * mean |ratio - median ratio| / median ratio; NaN for no sales."""
    r = _positive_finite("ratios", ratios)
    return float(_cod_rows(r)) if r.size else float("nan")


def prd(values: np.ndarray, prices: np.ndarray) -> float:
    """Price-related differential: mean ratio / weighted mean ratio; NaN for no sales."""
    v, p = _pair(values, prices)
    return float(_prd_rows(v / p, v, p)) if v.size else float("nan")


def value_proxy(values: np.ndarray, prices: np.ndarray, median_ratio: float) -> np.ndarray:
    """IAAO value proxy: 0.5 * value / median ratio + 0.5 * price, a market-value estimate that is neither
    value nor price alone (IAAO Standard on Ratio Studies 2013, the PRB of section 9.2.7; from memory)."""
    return 0.5 * np.asarray(values, dtype=float) / median_ratio + 0.5 * np.asarray(prices, dtype=float)


def prb(values: np.ndarray, prices: np.ndarray, confidence: float = 0.95) -> tuple[float, float, float]:
    """IAAO price-related bias: (coefficient, CI low, CI high).

    OLS with intercept of y = (ratio - median) / median on x = ln(proxy) / ln 2, where
    proxy = 0.5 * value / median + 0.5 * price.  The CI is slope -/+ t(df = n-2) * SE(slope).
    Coefficient NaN for fewer than 2 sales or equal proxies; CI NaN below 3 sales.
    """
    v, p = _pair(values, prices)
    _check_confidence(confidence)
    n = v.size
    if n < 2:
        return float("nan"), float("nan"), float("nan")
    r = v / p
    med = np.median(r)
    x = np.log(value_proxy(v, p, med)) / np.log(2.0)
    if np.ptp(x) == 0.0:
        return float("nan"), float("nan"), float("nan")
    y = (r - med) / med
    xc, yc = x - x.mean(), y - y.mean()
    sxx = xc @ xc
    slope = float(xc @ yc / sxx)
    if n < 3:
        return slope, float("nan"), float("nan")
    resid = yc - slope * xc
    se = np.sqrt((resid @ resid) / (n - 2) / sxx)
    half = float(special.stdtrit(n - 2, 0.5 + confidence / 2.0) * se)
    return slope, slope - half, slope + half


def bootstrap_cod_prd(values: np.ndarray, prices: np.ndarray, n_boot: int = 1000, seed: int = 0,
                      confidence: float = 0.95) -> tuple[tuple[float, float], tuple[float, float]]:
    """Seeded percentile-bootstrap CIs ((cod_lo, cod_hi), (prd_lo, prd_hi)), resampling sales as pairs.

    Sales are sorted by (price, value) before resampling, so the result depends only on the set of
    sales, never on row order.  Indices are drawn in chunks of about 2M to bound memory for large n;
    the chunk size depends only on n, so the same seed always gives the same CI.  NaN below 2 sales.
    """
    v, p = _pair(values, prices)
    _check_confidence(confidence)
    if n_boot < 1:
        raise ValueError(f"n_boot must be at least 1, got {n_boot!r}")
    n = v.size
    if n < 2:
        return _NAN_PAIR, _NAN_PAIR
    order = np.lexsort((v, p))
    v, p = v[order], p[order]
    rng = np.random.default_rng(seed)
    rows = max(1, _BOOT_CHUNK_ELEMENTS // n)
    cods, prds = np.empty(n_boot), np.empty(n_boot)
    for start in range(0, n_boot, rows):
        stop = min(start + rows, n_boot)
        idx = rng.integers(0, n, size=(stop - start, n))
        vb, pb = v[idx], p[idx]
        rb = vb / pb
        cods[start:stop] = _cod_rows(rb)
        prds[start:stop] = _prd_rows(rb, vb, pb)
    q = ((1.0 - confidence) / 2.0, (1.0 + confidence) / 2.0)
    cod_lo, cod_hi = np.quantile(cods, q)
    prd_lo, prd_hi = np.quantile(prds, q)
    return (float(cod_lo), float(cod_hi)), (float(prd_lo), float(prd_hi))


def iqr_fences(ratios: np.ndarray, k: float) -> tuple[float, float]:
    """Outlier fences (Q1 - k*IQR, Q3 + k*IQR); quartiles by numpy's default linear interpolation."""
    r = _positive_finite("ratios", ratios)
    if not (np.isfinite(k) and k >= 0):
        raise ValueError(f"IQR multiplier must be finite and >= 0, got {k!r}")
    if r.size == 0:
        return _NAN_PAIR
    q1, q3 = np.percentile(r, (25.0, 75.0))
    return float(q1 - k * (q3 - q1)), float(q3 + k * (q3 - q1))


def decile_bins(key: np.ndarray) -> np.ndarray:
    """The decile (0..9) of each key: edge_j <= key < edge_{j+1}, edges the 10th..90th percentiles (numpy linear)."""
    edges = np.percentile(key, np.arange(1, DECILES) * (100.0 / DECILES))
    return np.searchsorted(edges, key, side="right")


def decile_median_cis(ratios: np.ndarray, key: np.ndarray, confidence: float = 0.95) -> np.ndarray:
    """(median, CI low, CI high) of the ratios in each decile of `key` (rows; NaN where empty): the medians are
    decile_medians', the intervals median_ci's."""
    out = np.full((DECILES, 3), np.nan)
    bins = decile_bins(key)
    for j in range(DECILES):
        r = ratios[bins == j]
        if r.size:
            out[j] = (np.median(r), *median_ci(r, confidence))
    return out


def decile_medians(ratios: np.ndarray, prices: np.ndarray) -> np.ndarray:
    """Median ratio in each of 10 deciles of `prices` (or any positive key, e.g. the value proxy); NaN where empty.

    Decile j (0-based) holds sales with edge_j <= key < edge_{j+1}, where edge_1..edge_9 are the
    10th..90th key percentiles (numpy linear) and edge_0 = -inf, edge_10 = +inf; equal keys
    always share a decile.
    """
    r = _positive_finite("ratios", ratios)
    p = _positive_finite("prices", prices)
    if r.shape != p.shape:
        raise ValueError(f"ratios and prices differ in length ({r.size} vs {p.size})")
    out = np.full(DECILES, np.nan)
    if r.size == 0:
        return out
    bins = decile_bins(p)
    sorted_r = r[np.lexsort((r, bins))]
    counts = np.bincount(bins, minlength=DECILES)
    starts = np.cumsum(counts) - counts
    filled = counts > 0
    lo = (starts + (counts - 1) // 2)[filled]
    hi = (starts + counts // 2)[filled]
    out[filled] = 0.5 * (sorted_r[lo] + sorted_r[hi])
    return out


def ratio_study(values: np.ndarray, prices: np.ndarray, *, confidence: float = 0.95, n_boot: int = 1000,
                seed: int = 0, trim_iqr_k: float | None = None) -> RatioStudy:
    """Full ratio study of one group of sales; optional IQR trimming of ratio outliers first.

    Rows are put in (price, value) order before any arithmetic, so every statistic, the bootstrap
    CIs included, is identical whatever the input row order.
    """
    v, p = _pair(values, prices)
    _check_confidence(confidence)
    r_all = v / p
    if trim_iqr_k is None:
        trimmed = np.zeros(r_all.size, dtype=bool)
    else:
        lo, hi = iqr_fences(r_all, trim_iqr_k)
        trimmed = (r_all < lo) | (r_all > hi)
    trimmed.setflags(write=False)
    n_trimmed = int(trimmed.sum())
    v, p = v[~trimmed], p[~trimmed]
    order = np.lexsort((v, p))
    v, p = v[order], p[order]
    r = v / p
    n = int(r.size)
    if n == 0:
        nan = float("nan")
        return RatioStudy(0, n_trimmed, nan, _NAN_PAIR, nan, nan, nan, _NAN_PAIR, nan, _NAN_PAIR,
                          nan, _NAN_PAIR, (nan,) * DECILES, trimmed, (nan,) * DECILES)
    cod_ci, prd_ci = bootstrap_cod_prd(v, p, n_boot=n_boot, seed=seed, confidence=confidence)
    prb_coef, prb_lo, prb_hi = prb(v, p, confidence)
    median = float(np.median(r))
    return RatioStudy(
        n=n,
        n_trimmed=n_trimmed,
        median_ratio=median,
        median_ratio_ci=median_ci(r, confidence),
        mean_ratio=float(r.mean()),
        weighted_mean_ratio=weighted_mean_ratio(v, p),
        cod=cod(r),
        cod_ci=cod_ci,
        prd=prd(v, p),
        prd_ci=prd_ci,
        prb=prb_coef,
        prb_ci=(prb_lo, prb_hi),
        decile_median_ratios=tuple(float(x) for x in decile_medians(r, p)),
        trimmed=trimmed,
        proxy_decile_median_ratios=tuple(float(x) for x in decile_medians(r, value_proxy(v, p, median))),
    )
