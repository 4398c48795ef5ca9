"""Plots drawn in text: Unicode braille dots for data, box characters for axes and markers.

A terminal cell holds a 2 x 4 braille pattern (U+2800 + a bit per dot), so a plot of
W x H cells resolves 2W x 4H dots.  Traces with more samples than dot columns are drawn
as the min..max range of the samples falling in each column (no sample is skipped, so a
spike always shows).  Everything here is pure: arrays in, lines of rich ``Text`` out.

Braille dot bits (Unicode 3.0, "Braille Patterns" block U+2800-U+28FF): dots 1-2-3-7 are
the left column top to bottom (0x01, 0x02, 0x04, 0x40), dots 4-5-6-8 the right column
(0x08, 0x10, 0x20, 0x80).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from rich.style import Style
from rich.text import Text

BRAILLE_BASE = 0x2800
# BRAILLE_BITS[row_in_cell][column_in_cell]
BRAILLE_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.int32)
SI_PREFIXES = ((1e0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"))


@dataclass(frozen=True)
class Series:
    """One curve: x and y in physical units, drawn as a connected line of braille dots."""

    x: np.ndarray
    y: np.ndarray
    style: Style = Style()
    connect: bool = True


@dataclass(frozen=True)
class Marker:
    """A vertical marker at x, drawn with `char` in the empty cells of its column."""

    x: float
    char: str = "┊"
    style: Style = Style(dim=True)
    top_char: str | None = None


@dataclass(frozen=True)
class PlotSpec:
    """What to draw; ranges default to the data's extent."""

    series: tuple[Series, ...]
    x_unit: str = ""
    y_unit: str = ""
    x_range: tuple[float, float] | None = None
    y_range: tuple[float, float] | None = None
    markers: tuple[Marker, ...] = field(default=())
    y_scale_unit: bool = True  # scale y to an SI prefix (V -> mV)


def nice_step(span: float, max_ticks: int) -> float:
    """Smallest step of the form {1, 2, 5} x 10^k giving at most max_ticks intervals over span.

    Common practice, no source ("nice numbers" for axis labels).
    """
    if not (span > 0 and math.isfinite(span)):
        return 1.0
    raw = span / max(1, max_ticks)
    power = 10.0 ** math.floor(math.log10(raw))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * power >= raw * (1 - 1e-12):
            return m * power
    return 10.0 * power


def ticks(lo: float, hi: float, max_ticks: int) -> list[float]:
    """Multiples of nice_step(hi - lo) inside [lo, hi]."""
    step = nice_step(hi - lo, max_ticks)
    first = math.ceil(lo / step - 1e-9)
    last = math.floor(hi / step + 1e-9)
    return [round(k * step, 12) for k in range(first, last + 1)]


def format_tick(value: float, step: float) -> str:
    """A tick label with just enough decimals for the step."""
    decimals = max(0, -int(math.floor(math.log10(step) + 1e-9))) if step > 0 else 0
    text = f"{value:.{decimals}f}"
    return "0" if text.strip("-0.") == "" else text


def si_prefix(max_abs: float) -> tuple[float, str]:
    """(factor, prefix) so that max_abs / factor lies in [1, 1000): 0.012 V -> (1e-3, 'm')."""
    for factor, prefix in SI_PREFIXES:
        if max_abs >= factor:
            return factor, prefix
    return SI_PREFIXES[-1]


def _finite_range(values: list[np.ndarray]) -> tuple[float, float]:
    finite = [v[np.isfinite(v)] for v in values if v.size]
    finite = [v for v in finite if v.size]
    if not finite:
        return 0.0, 1.0
    lo = min(float(v.min()) for v in finite)
    hi = max(float(v.max()) for v in finite)
    if hi <= lo:
        pad = abs(lo) * 0.1 or 1.0
        return lo - pad, hi + pad
    return lo, hi


def rasterise(series: Series, x_range: tuple[float, float], y_range: tuple[float, float],
              n_dot_cols: int, n_dot_rows: int) -> np.ndarray:
    """Boolean dots (rows x cols, row 0 at the top) for one series.

    Each dot column gets the min..max of the samples whose x falls in it; with `connect`,
    each column's range is stretched to meet its left neighbour's, so the curve has no gaps.
    """
    dots = np.zeros((n_dot_rows, n_dot_cols), dtype=bool)
    x = np.asarray(series.x, dtype=float)
    y = np.asarray(series.y, dtype=float)
    keep = np.isfinite(x) & np.isfinite(y) & (x >= x_range[0]) & (x <= x_range[1])
    if not keep.any() or n_dot_cols < 1 or n_dot_rows < 1:
        return dots
    x, y = x[keep], y[keep]
    col = np.clip(np.round((x - x_range[0]) / (x_range[1] - x_range[0]) * (n_dot_cols - 1)).astype(int),
                  0, n_dot_cols - 1)
    row = np.round((y_range[1] - y) / (y_range[1] - y_range[0]) * (n_dot_rows - 1))
    row = np.clip(row, -1, n_dot_rows).astype(int)  # -1 / n_rows: off the plot, clipped later
    lo = np.full(n_dot_cols, np.iinfo(np.int64).max, dtype=np.int64)
    hi = np.full(n_dot_cols, np.iinfo(np.int64).min, dtype=np.int64)
    np.minimum.at(lo, col, row)
    np.maximum.at(hi, col, row)
    has = lo <= hi
    if series.connect:
        idx = np.flatnonzero(has)
        if idx.size > 1:
            prev, cur = idx[:-1], idx[1:]
            lo_c, hi_c = lo[cur].copy(), hi[cur].copy()
            lo[cur] = np.minimum(lo_c, hi[prev])
            hi[cur] = np.maximum(hi_c, lo[prev])
    rows = np.arange(n_dot_rows)[:, None]
    dots[:] = has[None, :] & (rows >= lo[None, :]) & (rows <= hi[None, :])
    return dots


def braille_cells(dots: np.ndarray) -> np.ndarray:
    """Code points (cell rows x cell cols) of the braille characters for a dot matrix."""
    n_rows, n_cols = dots.shape
    rows, cols = -(-n_rows // 4), -(-n_cols // 2)
    padded = np.zeros((rows * 4, cols * 2), dtype=np.int32)
    padded[:n_rows, :n_cols] = dots
    cells = padded.reshape(rows, 4, cols, 2) * BRAILLE_BITS[None, :, None, :]
    return cells.sum(axis=(1, 3))


def render_plot(spec: PlotSpec, width: int, height: int) -> list[Text]:
    """Lines of a plot `width` x `height` cells: y tick labels, braille area, x axis and labels.

    Returns fewer than `height` lines only when the space is too small to draw anything.
    """
    if width < 12 or height < 4:
        return [Text("(too small)"[:max(0, width)])]
    y_all = [np.asarray(s.y, dtype=float) for s in spec.series]
    x_all = [np.asarray(s.x, dtype=float) for s in spec.series]
    x_lo, x_hi = spec.x_range or _finite_range(x_all)
    y_lo, y_hi = spec.y_range or _finite_range(y_all)
    factor, prefix = (si_prefix(max(abs(y_lo), abs(y_hi))) if spec.y_scale_unit else (1.0, ""))
    plot_rows = height - 2
    y_ticks = ticks(y_lo / factor, y_hi / factor, max(1, min(plot_rows - 1, plot_rows // 2 + 2)))
    y_step = (y_ticks[1] - y_ticks[0]) if len(y_ticks) > 1 else max(abs(y_hi - y_lo) / factor, 1e-12)
    y_labels = {t: format_tick(t, y_step) for t in y_ticks}
    label_w = max([len(s) for s in y_labels.values()] + [len(prefix + spec.y_unit)]) + 1
    plot_cols = width - label_w - 1
    if plot_cols < 4:
        return [Text("(too small)"[:width])]
    dot_rows, dot_cols = plot_rows * 4, plot_cols * 2
    codes = np.zeros((plot_rows, plot_cols), dtype=np.int32)
    owner = np.full((plot_rows, plot_cols), -1, dtype=np.int32)
    for i, s in enumerate(spec.series):
        cells = braille_cells(rasterise(s, (x_lo, x_hi), (y_lo, y_hi), dot_cols, dot_rows))
        codes |= cells
        owner[cells > 0] = i  # a later series is drawn over an earlier one
    chars = np.full((plot_rows, plot_cols), " ", dtype="<U1")
    on = codes > 0
    chars[on] = [chr(BRAILLE_BASE + int(c)) for c in codes[on]]
    marker_style: dict[tuple[int, int], Style] = {}
    for m in spec.markers:
        if not (x_lo <= m.x <= x_hi):
            continue
        c = int(round((m.x - x_lo) / (x_hi - x_lo) * (dot_cols - 1))) // 2
        for r in range(plot_rows):
            if not on[r, c]:
                chars[r, c] = m.top_char if (r == 0 and m.top_char) else m.char
                marker_style[(r, c)] = m.style
    # y tick rows (row of each label), row 0 = y_hi
    tick_row = {int(round((y_hi - t * factor) / (y_hi - y_lo) * (plot_rows - 1))): t for t in y_ticks}
    lines: list[Text] = []
    for r in range(plot_rows):
        label = y_labels[tick_row[r]] if r in tick_row else ""
        line = Text(label.rjust(label_w) + ("┤" if r in tick_row else "│"))
        for c in range(plot_cols):
            style = marker_style.get((r, c))
            if style is None and owner[r, c] >= 0:
                style = spec.series[owner[r, c]].style
            line.append(chars[r, c], style or Style())
        lines.append(line)
    lines += _x_axis(x_lo, x_hi, plot_cols, label_w, spec.x_unit, prefix + spec.y_unit)
    return lines


def _x_axis(x_lo: float, x_hi: float, plot_cols: int, label_w: int, x_unit: str, y_unit: str) -> list[Text]:
    """The axis line with tick marks and, below it, the tick labels and the x unit."""
    x_ticks = ticks(x_lo, x_hi, max(1, plot_cols // 10))
    step = (x_ticks[1] - x_ticks[0]) if len(x_ticks) > 1 else max(x_hi - x_lo, 1e-12)
    axis = ["─"] * plot_cols
    labels = [" "] * (plot_cols + label_w + 1)
    unit = f" {x_unit}" if x_unit else ""
    free_from = 0
    for t in x_ticks:
        c = int(round((t - x_lo) / (x_hi - x_lo) * (plot_cols * 2 - 1))) // 2
        axis[c] = "┬"
        text = format_tick(t, step)
        start = max(label_w + 1 + c - len(text) // 2, free_from)
        if start + len(text) > label_w + 1 + plot_cols - len(unit):
            continue
        labels[start:start + len(text)] = list(text)
        free_from = start + len(text) + 1
    labels[len(labels) - len(unit):] = list(unit)
    corner = y_unit[:label_w].rjust(label_w)
    return [Text(corner + "└" + "".join(axis)), Text("".join(labels))]
