"""Plot specifications for the live views, built from the LiveState (pure)."""

from __future__ import annotations

import numpy as np
from rich.style import Style

from controller.tui.adapter import Spectrum, Trace
from controller.tui.plot import Marker, PlotSpec, Series
from controller.tui.state import HistoryPoint, ShotFieldPoint

SIGNAL_STYLE = Style(color="cyan")
ENVELOPE_STYLE = Style(color="yellow", bold=True)
ERROR_BAR_STYLE = Style(dim=True)
MAINS_MARKER = Marker(0.0, char="┊", style=Style(dim=True))
LARMOR_TOP = "▾"
TRACE_PERCENTILE = 99.5


def trace_spec(trace: Trace) -> PlotSpec:
    """Signal (thin) and its demodulated envelope (bold) against time from time zero.

    The y range is symmetric and robust: 1.2 x the 99.5th percentile of |signal| (or the
    envelope's peak if larger), so one spike does not flatten the FID; a spike beyond it
    runs into the plot's edge.  The x range starts at time zero, so the dead time shows.
    """
    finite = trace.signal_v[np.isfinite(trace.signal_v)]
    robust = 1.2 * float(np.percentile(np.abs(finite), TRACE_PERCENTILE)) if finite.size else 0.0
    envelope_peak = float(np.nanmax(trace.envelope_v)) * 1.1 if trace.envelope_v.size else 0.0
    half = max(robust, envelope_peak) or 1.0
    end = float(trace.time_s[-1]) if trace.time_s.size else 1.0
    return PlotSpec(series=(Series(trace.time_s, trace.signal_v, SIGNAL_STYLE),
                            Series(trace.envelope_time_s, trace.envelope_v, ENVELOPE_STYLE)),
                    x_unit="s", y_unit="V", x_range=(0.0, end), y_range=(-half, half))


def spectrum_spec(spectrum: Spectrum) -> PlotSpec:
    """Amplitude spectrum with the mains harmonics (┊) and the line used as reference (▾)."""
    markers = tuple(Marker(f, MAINS_MARKER.char, MAINS_MARKER.style) for f in spectrum.mains_harmonics_hz)
    markers += (Marker(spectrum.larmor_hz, char=" ", style=Style(bold=True), top_char=LARMOR_TOP),)
    lo = float(spectrum.frequency_hz[0]) if spectrum.frequency_hz.size else spectrum.larmor_hz - 1
    hi = float(spectrum.frequency_hz[-1]) if spectrum.frequency_hz.size else spectrum.larmor_hz + 1
    top = float(spectrum.amplitude_v.max()) if spectrum.amplitude_v.size else 1.0
    return PlotSpec(series=(Series(spectrum.frequency_hz, spectrum.amplitude_v, SIGNAL_STYLE),),
                    x_unit="Hz", y_unit="V", x_range=(lo, hi), y_range=(0.0, top * 1.2 or 1.0), markers=markers)


def history_specs(points: list[HistoryPoint]) -> tuple[PlotSpec, PlotSpec]:
    """Field (nT) and T2* (s) of each run against minutes since the first, with ±1 sd bars."""
    t0 = points[0].at_s
    minutes = np.array([(p.at_s - t0) / 60.0 for p in points])
    return (points_spec(minutes, [p.field_nt for p in points], [p.field_sd_nt for p in points], "min", "nT"),
            points_spec(minutes, [p.t2star_s for p in points], [p.t2star_sd_s for p in points], "min", "s"))


def history_sections(history: list[HistoryPoint], shot_fields: list[ShotFieldPoint]) -> list[tuple[str, PlotSpec]]:
    """(caption, plot) of the history pane, most urgent first: the latest FID run's field after
    each shot (once it has two), then the field and T2* of each run."""
    sections = []
    if len(shot_fields) >= 2:
        sections.append((f"field per shot · {shot_fields[-1].run_id} ±1 sd",
                         shot_field_spec(shot_fields)))
    if history:
        field_plot, t2star_plot = history_specs(history)
        sections += [("field per run ±1 sd", field_plot), ("T2* per run ±1 sd", t2star_plot)]
    return sections


def shot_field_spec(points: list[ShotFieldPoint]) -> PlotSpec:
    """The running fit's field (nT, ±1 sd) after each shot against seconds since the run's first shot."""
    t0 = points[0].at_s
    seconds = np.array([p.at_s - t0 for p in points])
    return points_spec(seconds, [p.field_nt for p in points], [p.field_sd_nt for p in points], "s", "nT")


def points_spec(x: np.ndarray, values: list[float], sds: list[float], x_unit: str, y_unit: str) -> PlotSpec:
    """Unconnected points with ±1 sd bars (dim); x from 0 to 1.1 x its largest value."""
    v, sd = np.array(values), np.array(sds)
    sd = np.where(np.isfinite(sd), sd, 0.0)
    bars = Series(np.repeat(x, 2), np.column_stack([v - sd, v + sd]).ravel(), ERROR_BAR_STYLE, connect=False)
    lo, hi = float((v - sd).min()), float((v + sd).max())
    pad = max(hi - lo, abs(hi) * 1e-6, 1e-9) * 0.1
    return PlotSpec(series=(bars, Series(x, v, ENVELOPE_STYLE, connect=False)), x_unit=x_unit, y_unit=y_unit,
                    x_range=(0.0, max(0.1, float(x.max()) * 1.1)), y_range=(lo - pad, hi + pad), y_scale_unit=False)
