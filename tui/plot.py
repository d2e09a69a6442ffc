"""Plots drawn with Unicode braille dots and block elements: curves with bands, scatters and histograms.

Each plot is a widget that redraws from its data at its current size (vectorised numpy, a few
milliseconds); colours come from component classes styled with theme variables, so plots read on dark
and light themes. The shapes use position, not colour alone: lines, dots, bars and a legend with symbols.
"""
from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from rich.style import Style
from rich.text import Text
from textual.widget import Widget

# Braille dot bits by (pixel row within the cell 0..3, pixel column 0..1): Unicode U+2800 block layout.
DOT_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.int32)
EIGHTHS = " ▁▂▃▄▅▆▇█"
FULL_BLOCKS = {"alt": "▓"}   # a second group's full cells are shaded, so groups differ by shape, not colour alone
Formatter = Callable[[float], str]


def braille(mask: np.ndarray) -> np.ndarray:
    """(4h, 2w) boolean pixels -> (h, w) braille code offsets (0 = empty cell)."""
    h, w = mask.shape[0] // 4, mask.shape[1] // 2
    cells = mask[: h * 4, : w * 2].reshape(h, 4, w, 2)
    return (cells * DOT_BITS[None, :, None, :]).sum(axis=(1, 3))


def scale(values: np.ndarray, lo: float, hi: float, n: int) -> np.ndarray:
    """Positions 0..n-1 of values on [lo, hi] (float, NaN kept); a flat range maps to the middle."""
    span = hi - lo
    if not span > 0:
        return np.where(np.isnan(values), np.nan, (n - 1) / 2)
    return np.clip(np.floor((values - lo) / span * n), 0, n - 1)


def padded_range(*arrays: Sequence[float], pad: float = 0.05) -> tuple[float, float]:
    """The range of the finite values given, widened by `pad` of its span on each side."""
    values = np.concatenate([np.asarray(a, dtype=float).ravel() for a in arrays]) if arrays else np.zeros(0)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return 0.0, 1.0
    lo, hi = float(values.min()), float(values.max())
    span = hi - lo if hi > lo else max(abs(hi), 1.0) * 0.1
    return lo - pad * span, hi + pad * span


@dataclass(frozen=True)
class Layer:
    """One thing drawn on a chart: a line, a band between y and y2, points, or a dashed horizontal line."""

    kind: str                  # line | band | points | hline
    x: Sequence[float] = ()
    y: Sequence[float] = ()
    y2: Sequence[float] = ()
    style: str = "line"        # component class suffix: line, parent, band, points, reference, alt
    label: str = ""            # legend entry ("" = none)


@dataclass(frozen=True)
class ChartData:
    """What a Chart shows; ranges default to the data's, padded."""

    layers: tuple[Layer, ...]
    x_range: tuple[float, float] | None = None
    y_range: tuple[float, float] | None = None
    x_format: Formatter = field(default=lambda v: f"{v:.3g}")
    y_format: Formatter = field(default=lambda v: f"{v:.3g}")
    strip: tuple[int, ...] = ()     # counts in equal bins over the x range, drawn as a row of bars
    strip_label: str = ""
    x_title: str = ""               # what each axis measures, in its unit: "living area (sq ft)"
    y_title: str = ""


# each style differs by shape as well as colour: a solid line, a dashed parent line, dots, a dotted reference
LEGEND_MARKS = {"line": "━", "parent": "╍", "band": "░", "points": "⠶", "reference": "┄", "alt": "▪"}
BAND_FILL = "░"   # a band is shaded by a glyph in a legible colour, never by a background tint: a line crossing it
#                   keeps the contrast it has on the plot's background
LOADING = "reading…"   # what a plot shows before its data arrives (never "nothing to plot" while loading)


def axis_titles(x_title: str, y_title: str, width: int) -> list[str]:
    """What each axis measures and in which unit: one line, or one per axis when one line does not fit."""
    titles = [t for t in (f"→ {x_title}" if x_title else "", f"↑ {y_title}" if y_title else "") if t]
    one = " · ".join(titles)
    return [one] if len(one) <= width else titles


class Chart(Widget):
    """A braille chart with y labels on the left, x labels below, an optional data strip and a legend."""

    COMPONENT_CLASSES = {"chart--axis", "chart--line", "chart--parent", "chart--band", "chart--points",
                         "chart--reference", "chart--alt", "chart--strip"}
    DEFAULT_CSS = """
    Chart { height: 1fr; min-height: 8; }
    Chart > .chart--axis { color: $text-muted; }
    Chart > .chart--line { color: $accent; text-style: bold; }
    Chart > .chart--parent { color: $secondary; }
    Chart > .chart--band { color: $accent; }
    Chart > .chart--points { color: $primary; }
    Chart > .chart--reference { color: $text-muted; }
    Chart > .chart--alt { color: $warning; }
    Chart > .chart--strip { color: $primary; }
    """

    def __init__(self, data: ChartData | None = None, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.data = data
        self.loaded = data is not None

    def show(self, data: ChartData | None) -> None:
        self.data, self.loaded = data, True
        self.refresh()

    def _style(self, name: str) -> Style:
        return self.get_component_rich_style(f"chart--{name}")

    def _legend(self) -> Text:
        text = Text(no_wrap=True, overflow="ellipsis")
        assert self.data is not None
        for layer in self.data.layers:
            if layer.label:
                mark = LEGEND_MARKS.get(layer.style, "━")
                text.append(mark, self._style(layer.style))
                text.append(f" {layer.label}   ", self._style("axis"))
        return text

    def render(self) -> Text:
        width, height = self.size
        if not self.loaded:
            return Text(LOADING, style=self._style("axis"))
        if self.data is None or not self.data.layers:
            return Text("nothing to plot", style=self._style("axis"))
        d = self.data
        legend = any(layer.label for layer in d.layers)
        titles = axis_titles(d.x_title, d.y_title, width)
        rows = height - 1 - int(legend) - int(bool(d.strip)) - len(titles)
        xs = [layer.x for layer in d.layers if layer.kind != "hline"]
        ys = [v for layer in d.layers for v in (layer.y, layer.y2)]
        x0, x1 = d.x_range or padded_range(*xs, pad=0.0)
        y0, y1 = d.y_range or padded_range(*ys)
        ticks = self._ticks(d, rows, y0, y1)
        margin = max(len(label) for label in ticks.values()) + 1
        cols = width - margin
        if rows < 2 or cols < 8:
            return Text("(too small to plot)", style=self._style("axis"))
        fg, bg = self._cells(d, rows, cols, (x0, x1), (y0, y1))
        out = Text(no_wrap=True, overflow="crop")
        if legend:
            out.append_text(self._legend())
            out.append("\n")
        axis = self._style("axis")
        for r in range(rows):
            label = ticks.get(r)
            out.append((label or "").rjust(margin - 1) + ("┤" if label else "│"), axis)
            self._append_row(out, fg[r], bg[r])
            out.append("\n")
        if d.strip:
            out.append(d.strip_label[: margin - 1].rjust(margin - 1) + "│", axis)
            out.append(self._strip(d.strip, cols), self._style("strip"))
            out.append("\n")
        out.append(" " * margin, axis)
        out.append(self._x_labels(d.x_format, x0, x1, cols), axis)
        for line in titles:
            out.append("\n" + line, axis)
        return out

    @staticmethod
    def _ticks(d: ChartData, rows: int, y0: float, y1: float) -> dict[int, str]:
        """Labelled rows: top and bottom, and each reference line (else the middle)."""
        ticks = {0: d.y_format(y1), rows - 1: d.y_format(y0)}
        refs = [v for layer in d.layers if layer.kind == "hline" for v in layer.y if y0 <= v <= y1]
        for v in refs or [(y0 + y1) / 2]:
            r = int((rows * 4 - 1 - scale(np.array([v]), y0, y1, rows * 4)[0]) // 4)
            if 0 < r < rows - 1:
                ticks[r] = d.y_format(v)
        return ticks

    def _cells(self, d: ChartData, rows: int, cols: int, xr: tuple[float, float],
               yr: tuple[float, float]) -> tuple[list[list[tuple[str, str | None]]], np.ndarray]:
        """Per cell: (glyph, style of the topmost layer drawn there) and whether the band covers it."""
        ph, pw = rows * 4, cols * 2
        band = np.zeros((rows, cols), dtype=bool)
        bits = np.zeros((rows, cols), dtype=np.int32)
        owner = np.full((rows, cols), "", dtype=object)
        for layer in d.layers:
            mask = self._mask(layer, ph, pw, xr, yr)
            if layer.kind == "band":
                band |= mask.reshape(rows, 4, cols, 2).mean(axis=(1, 3)) >= 0.5
                continue
            codes = braille(mask)
            bits |= codes
            owner[codes > 0] = layer.style
        glyphs = [[(chr(0x2800 + int(b)) if b else " ", o or None) for b, o in zip(br, orow)]
                  for br, orow in zip(bits, owner)]
        return glyphs, band

    def _mask(self, layer: Layer, ph: int, pw: int, xr: tuple[float, float], yr: tuple[float, float]) -> np.ndarray:
        mask = np.zeros((ph, pw), dtype=bool)
        rows_axis = np.arange(ph)[:, None]

        def to_row(values: Sequence[float] | np.ndarray) -> np.ndarray:
            return (ph - 1) - scale(np.asarray(values, dtype=float), yr[0], yr[1], ph)

        if layer.kind == "hline":
            for yv in layer.y:
                if yr[0] <= yv <= yr[1]:
                    mask[int(to_row([yv])[0]), (np.arange(pw) // 2) % 2 == 0] = True
            return mask
        x = np.asarray(layer.x, dtype=float)
        if layer.kind == "points":
            keep = np.isfinite(x) & np.isfinite(np.asarray(layer.y, dtype=float))
            cols = scale(x[keep], xr[0], xr[1], pw).astype(int)
            mask[to_row(np.asarray(layer.y, dtype=float)[keep]).astype(int), cols] = True
            return mask
        centres = xr[0] + (np.arange(pw) + 0.5) / pw * (xr[1] - xr[0])
        inside = (centres >= np.nanmin(x)) & (centres <= np.nanmax(x)) if x.size else np.zeros(pw, bool)
        y = to_row(np.interp(centres, x, np.asarray(layer.y, dtype=float)))
        if layer.kind == "band":
            y2 = to_row(np.interp(centres, x, np.asarray(layer.y2, dtype=float)))
            lo, hi = np.minimum(y, y2), np.maximum(y, y2)
        else:
            nxt = np.append(y[1:], y[-1])
            lo, hi = np.minimum(y, nxt), np.maximum(y, nxt)
        if layer.style == "parent":   # dashed: three cells drawn, one left out
            inside = inside & ((np.arange(pw) // 2) % 4 != 3)
        if layer.style == "reference":   # dotted, as the reference's horizontal lines
            inside = inside & ((np.arange(pw) // 2) % 2 == 0)
        return (rows_axis >= lo[None, :]) & (rows_axis <= hi[None, :]) & inside[None, :]

    def _append_row(self, out: Text, glyphs: list[tuple[str, str | None]], band: np.ndarray) -> None:
        run, run_style = "", Style()
        for (glyph, owner), covered in zip(glyphs, band):
            if covered and owner is None:
                glyph, owner = BAND_FILL, "band"
            style = self._style(owner) if owner else Style()
            if style != run_style and run:
                out.append(run, run_style)
                run = ""
            run_style = style
            run += glyph
        if run:
            out.append(run, run_style)

    @staticmethod
    def _strip(counts: Sequence[int], cols: int) -> str:
        c = np.asarray(counts, dtype=float)
        per_col = np.zeros(cols)
        np.add.at(per_col, ((np.arange(c.size) + 0.5) / c.size * cols).astype(int), c)
        top = per_col.max()
        if top <= 0:
            return " " * cols
        levels = np.where(per_col > 0, np.maximum(1, np.round(per_col / top * 8)), 0).astype(int)
        return "".join(EIGHTHS[v] for v in levels)

    @staticmethod
    def _x_labels(fmt: Formatter, x0: float, x1: float, cols: int) -> str:
        left, mid, right = fmt(x0), fmt((x0 + x1) / 2), fmt(x1)
        line = [" "] * cols
        for text, start in ((left, 0), (mid, cols // 2 - len(mid) // 2), (right, cols - len(right))):
            for i, ch in enumerate(text):
                if 0 <= start + i < cols:
                    line[start + i] = ch
        return "".join(line)


@dataclass(frozen=True)
class BarsData:
    """Grouped histogram: counts per equal bin of [lo, hi] for each group, each shown as its share."""

    groups: tuple[tuple[str, tuple[int, ...], str], ...]   # (label, counts, style)
    lo: float
    hi: float
    x_format: Formatter = field(default=lambda v: f"{v:.3g}")
    open_ends: bool = False                                # the end bins also hold what lies beyond
    x_title: str = ""
    y_title: str = ""


class Bars(Widget):
    """Vertical bars in eighth-block steps, groups side by side per bin, normalised to shares of each group."""

    COMPONENT_CLASSES = {"chart--axis", "chart--points", "chart--alt"}
    DEFAULT_CSS = """
    Bars { height: 1fr; min-height: 6; }
    Bars > .chart--axis { color: $text-muted; }
    Bars > .chart--points { color: $primary; }
    Bars > .chart--alt { color: $warning; }
    """

    def __init__(self, data: BarsData | None = None, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.data = data
        self.loaded = data is not None

    def show(self, data: BarsData | None) -> None:
        self.data, self.loaded = data, True
        self.refresh()

    def render(self) -> Text:
        axis = self.get_component_rich_style("chart--axis")
        if not self.loaded:
            return Text(LOADING, style=axis)
        if self.data is None:
            return Text("nothing to plot", style=axis)
        d = self.data
        width, height = self.size
        shares = [np.asarray(c, float) / max(sum(c), 1) for _, c, _ in d.groups]
        n_bins, n_groups = len(shares[0]), len(shares)
        margin = 5
        while n_bins > 1 and (width - margin) // n_bins < n_groups + 1:
            shares = [s[: n_bins // 2 * 2].reshape(-1, 2).sum(axis=1) for s in shares]
            n_bins = len(shares[0])
        per_bin = (width - margin) // n_bins
        titles = axis_titles(d.x_title, d.y_title, width)
        rows = height - 2 - len(titles)
        top = max(float(max(s.max() for s in shares)), 1e-12)
        out = Text(no_wrap=True, overflow="crop")
        for label, _, style in d.groups:
            out.append(f"{FULL_BLOCKS.get(style, '█')} ", self.get_component_rich_style(f"chart--{style}"))
            out.append(f"{label}   ", axis)
        out.append("\n")
        eighths = [np.round(s / top * rows * 8).astype(int) for s in shares]
        for r in range(rows):
            floor_ = (rows - 1 - r) * 8
            out.append(f"{top * 100:>3.0f}%┤" if r == 0 else "    │", axis)
            for b in range(n_bins):
                for g, (_, _, style) in enumerate(d.groups):
                    level = int(np.clip(eighths[g][b] - floor_, 0, 8))
                    glyph = FULL_BLOCKS.get(style, "█") if level == 8 else EIGHTHS[level]
                    out.append(glyph, self.get_component_rich_style(f"chart--{style}"))
                out.append(" " * (per_bin - n_groups), axis)
            out.append("\n")
        cols = per_bin * n_bins
        left, right = d.x_format(d.lo), d.x_format(d.hi)
        if d.open_ends:
            left, right = "≤" + left, "≥" + right
        out.append(" " * margin + left + " " * max(1, cols - len(left) - len(right)) + right, axis)
        for line in titles:
            out.append("\n" + line, axis)
        return out


@dataclass(frozen=True)
class LevelBar:
    label: str
    value: float
    lo: float | None = None
    hi: float | None = None
    parent: float | None = None


class LevelBars(Widget):
    """Signed horizontal bars, one per level of an ordinal, categorical or yes/no feature."""

    COMPONENT_CLASSES = {"chart--axis", "chart--line", "chart--parent"}
    DEFAULT_CSS = """
    LevelBars { height: auto; }
    LevelBars > .chart--axis { color: $text-muted; }
    LevelBars > .chart--line { color: $accent; }
    LevelBars > .chart--parent { color: $secondary; }
    """

    def __init__(self, bars: Sequence[LevelBar] = (), fmt: Formatter = lambda v: f"{v:+.1f}%",
                 *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.bars = list(bars)
        self.fmt = fmt
        self.loaded = bool(bars)

    def show(self, bars: Sequence[LevelBar]) -> None:
        self.bars, self.loaded = list(bars), True
        self.refresh(layout=True)

    def get_content_height(self, container: object, viewport: object, width: int) -> int:
        return max(1, len(self.bars) + 1)

    def render(self) -> Text:
        axis = self.get_component_rich_style("chart--axis")
        if not self.bars:
            return Text("nothing to plot" if self.loaded else LOADING, style=axis)
        label_w = max(len(b.label) for b in self.bars) + 1
        texts = [self._numbers(b) for b in self.bars]
        text_w = max(len(t) for t in texts) + 1
        span_w = max(8, self.size.width - label_w - text_w - 2)
        ends = [v for b in self.bars for v in (b.value, b.lo, b.hi, b.parent, 0.0) if v is not None]
        lo, hi = min(ends), max(ends)
        zero = round((0 - lo) / (hi - lo) * (span_w - 1)) if hi > lo else span_w // 2
        out = Text(no_wrap=True, overflow="crop")
        out.append(" " * label_w + "━ segment  ", self.get_component_rich_style("chart--line"))
        out.append("│ market area", self.get_component_rich_style("chart--parent"))
        for b, numbers in zip(self.bars, texts):
            out.append("\n" + b.label.rjust(label_w - 1) + " ", axis)
            pos = round((b.value - lo) / (hi - lo) * (span_w - 1)) if hi > lo else zero
            cells = [" "] * span_w
            for i in range(min(pos, zero), max(pos, zero) + 1):
                cells[i] = "█"
            cells[zero] = "┃" if pos == zero else cells[zero]
            parent_at = None
            if b.parent is not None and hi > lo:
                parent_at = round((b.parent - lo) / (hi - lo) * (span_w - 1))
            for i, ch in enumerate(cells):
                style = "chart--parent" if i == parent_at else "chart--line"
                out.append("│" if i == parent_at else ch, self.get_component_rich_style(style))
            out.append(" " + numbers, axis)
        return out

    def _numbers(self, b: LevelBar) -> str:
        band = f" ({self.fmt(b.lo)} … {self.fmt(b.hi)})" if b.lo is not None and b.hi is not None else ""
        return self.fmt(b.value) + band


def percent_axis(v: float) -> str:
    """A log effect shown as a percentage of value."""
    return f"{100 * math.expm1(v):+.0f}%"
