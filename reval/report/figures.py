"""The study report's plots, each a matplotlib Figure drawn from data the report already read (stored studies,
the sales of the study, SQL-binned parcel counts); no plot receives a million points."""
from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from reval.stats.stored import StudyGroup

SAMPLE_POINTS = 5000        # the ratio scatter draws at most this many sales (a seeded sample; the caption says so)
WIDE, TALL = 7.0, 3.6       # inches
LIMIT_COLOUR = "#b22"      # every standard's limit is drawn dashed in this colour


def _limits(ax: Axes, bounds: tuple[float, float], horizontal: bool = True) -> None:
    for b in bounds:
        (ax.axhline if horizontal else ax.axvline)(b, color=LIMIT_COLOUR, linestyle="--", linewidth=1)


def ratio_scatter(proxy: np.ndarray, ratio: np.ndarray, bounds: tuple[float, float], seed: int) -> tuple[Figure, int]:
    """Ratio against the value proxy on a log axis with the level limits drawn; at most SAMPLE_POINTS sales, a
    seeded sample. Returns the figure and how many points it drew."""
    if proxy.size > SAMPLE_POINTS:
        keep = np.sort(np.random.default_rng(seed).choice(proxy.size, SAMPLE_POINTS, replace=False))
        proxy, ratio = proxy[keep], ratio[keep]
    fig = Figure(figsize=(WIDE, TALL))
    ax = fig.subplots()
    ax.scatter(proxy, ratio, s=5, alpha=0.35, color="#1f5fa8", linewidths=0)
    ax.set_xscale("log")
    _limits(ax, bounds)
    ax.axhline(1.0, color="#555", linewidth=0.6)
    ax.set_xlabel("value proxy (0.5 x value / median ratio + 0.5 x price), log scale")
    ax.set_ylabel("ratio (value / time-adjusted price)")
    if ratio.size:
        lo, hi = np.percentile(ratio, [0.5, 99.5])
        ax.set_ylim(min(lo, bounds[0]) - 0.05, max(hi, bounds[1]) + 0.05)
    return fig, int(proxy.size)


def ratio_boxes(groups: Sequence[tuple[str, np.ndarray]], bounds: tuple[float, float], what: str) -> Figure:
    """Box plots of ratios by stratum (whiskers at 1.5 IQR, outliers not drawn), the level limits drawn."""
    height = max(TALL, 0.22 * len(groups) + 1.0)
    fig = Figure(figsize=(WIDE, height))
    ax = fig.subplots()
    drawn = [(name, r) for name, r in groups if r.size]
    if drawn:
        ax.boxplot([r for _, r in drawn], orientation="horizontal", showfliers=False, widths=0.6,
                   medianprops={"color": "#1f5fa8"})
        ax.set_yticks(range(1, len(drawn) + 1), [name for name, _ in drawn], fontsize=7)
    _limits(ax, bounds, horizontal=False)
    ax.invert_yaxis()
    ax.set_xlabel("ratio")
    ax.set_title(f"ratios by {what}", fontsize=9)
    return fig


def decile_medians(medians: np.ndarray, lo: np.ndarray, hi: np.ndarray, bounds: tuple[float, float]) -> Figure:
    """Median ratio in each decile of the value proxy with its confidence interval."""
    fig = Figure(figsize=(WIDE, TALL))
    ax = fig.subplots()
    x = np.arange(1, medians.size + 1)
    ax.errorbar(x, medians, yerr=[medians - lo, hi - medians], fmt="o", color="#1f5fa8", capsize=3)
    _limits(ax, bounds)
    ax.set_xticks(x)
    ax.set_xlabel("decile of the value proxy (1 = lowest)")
    ax.set_ylabel("median ratio")
    return fig


def cod_by_group(groups: Sequence[StudyGroup], limits: Sequence[float | None]) -> Figure:
    """COD of each group with its confidence interval and its class's limit (groups without a COD are left out)."""
    rows = [(g, lim) for g, lim in zip(groups, limits) if g["cod"] is not None]
    fig = Figure(figsize=(WIDE, max(TALL, 0.22 * len(rows) + 1.0)))
    ax = fig.subplots()
    y = np.arange(len(rows))
    cod = np.array([g["cod"] for g, _ in rows], dtype=float)
    lo = np.array([g["cod_ci"][0] if g["cod_ci"][0] is not None else np.nan for g, _ in rows], dtype=float)
    hi = np.array([g["cod_ci"][1] if g["cod_ci"][1] is not None else np.nan for g, _ in rows], dtype=float)
    ax.barh(y, cod, color="#9bb8d8")
    ax.errorbar(cod, y, xerr=[np.nan_to_num(cod - lo), np.nan_to_num(hi - cod)], fmt="none", ecolor="#333", capsize=2)
    for i, (_, lim) in enumerate(rows):
        if lim is not None:
            ax.plot([lim, lim], [i - 0.4, i + 0.4], color=LIMIT_COLOUR, linestyle="--", linewidth=1)
    ax.set_yticks(y, [g["group"] for g, _ in rows], fontsize=7)
    ax.invert_yaxis()
    ax.set_xlabel("COD (dashed: the limit of the group's property class)")
    return fig


def market_trend(trend: pd.DataFrame) -> Figure:
    """Each area's price index by month before the valuation date with its band."""
    fig = Figure(figsize=(WIDE, TALL))
    ax = fig.subplots()
    for area, rows in trend.groupby("area", sort=True):
        x = rows["month_offset"].to_numpy(float)
        line = ax.plot(x, np.exp(rows["log_index"].to_numpy(float)), label=str(area), linewidth=1.2)
        ax.fill_between(x, np.exp(rows["lo"].to_numpy(float)), np.exp(rows["hi"].to_numpy(float)),
                        color=line[0].get_color(), alpha=0.15, linewidth=0)
    ax.axhline(1.0, color="#555", linewidth=0.6)
    ax.set_xlabel("months before the valuation month")
    ax.set_ylabel("price level (valuation month = 1)")
    if trend["area"].nunique() <= 12:
        ax.legend(fontsize=7, ncols=3)
    return fig


def change_histogram(bins: pd.DataFrame, n_bins: int) -> Figure:
    """Share of sold and of unsold parcels in each bin of value change (counted in SQL)."""
    fig = Figure(figsize=(WIDE, TALL))
    ax = fig.subplots()
    lo, hi = float(bins["lo"].iloc[0]), float(bins["hi"].iloc[0])
    width = (hi - lo) / n_bins if hi > lo else 1.0
    for sold, colour, label in ((False, "#9bb8d8", "unsold parcels"), (True, "#c0504d", "sold parcels")):
        part = bins[bins["sold"] == sold]
        if part.empty:
            continue
        share = np.zeros(n_bins)
        share[part["bin"].to_numpy(int)] = part["n"].to_numpy(float) / part["n"].sum()
        ax.step(lo + width * np.arange(n_bins + 1), np.append(share, share[-1]), where="post", color=colour,
                label=f"{label} ({int(part['n'].sum()):,})")
    ax.set_xlabel("value change (new / prior - 1); the end bins hold what lies beyond")
    ax.set_ylabel("share of parcels")
    ax.legend(fontsize=8)
    return fig


def curves(frame: pd.DataFrame) -> Figure:
    """Small multiples, one panel per feature: every segment's curve (thin) and the parents' (dashed)."""
    features = list(dict.fromkeys(frame["feature"]))
    cols = 3
    rows_n = max(1, math.ceil(len(features) / cols))
    fig = Figure(figsize=(WIDE, 2.1 * rows_n + 0.3))
    axes = np.atleast_1d(fig.subplots(rows_n, cols, squeeze=False)).ravel()
    for ax, feature in zip(axes, features):
        part = frame[frame["feature"] == feature]
        for _, seg in part.groupby("segment", sort=True):
            ax.plot(seg["x"], np.exp(seg["effect"]), color="#1f5fa8", linewidth=0.6, alpha=0.6)
            if seg["parent_effect"].notna().any():
                ax.plot(seg["x"], np.exp(seg["parent_effect"]), color="#b22", linewidth=0.5, alpha=0.3, linestyle="--")
        ax.set_title(feature, fontsize=8)
        ax.tick_params(labelsize=6)
    for ax in axes[len(features):]:
        ax.set_axis_off()
    fig.supylabel("value factor (reference parcel = 1)", fontsize=8)
    fig.tight_layout()
    return fig
