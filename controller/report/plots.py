"""PNG plots of a report (matplotlib, Agg backend: no display needed).

Every time plot shares one UTC time axis and shows the gaps (grey spans) and trips (red
lines), so a pause or a trip lines up with what the field, T2*, SNR and coil temperature did.
Field uncertainty bands are +/- 1 sd and +/- 2 sd of each reading; the lower field panel shows
each reading minus a local quadratic fit over LOCAL_FIT_READINGS readings (Savitzky & Golay,
Anal. Chem. 36:1627, 1964; scipy.signal.savgol_filter), which follows the diurnal trend, so the
bands show whether the scatter matches the stated uncertainty (the fit takes a little of the
scatter with it: about sqrt(1 - h0), h0 the fit's central weight, ~0.9 for 15 readings).
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.dates as mdates  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from scipy.signal import savgol_filter  # noqa: E402

from controller.report.data import ReportData  # noqa: E402

LOCAL_FIT_READINGS = 15
DPI = 110
BAND_COLOURS = ("#9ecae1", "#deebf7")


def utc_dates(t_s: np.ndarray) -> np.ndarray:
    """Epoch seconds -> numpy datetime64 (UTC), which matplotlib plots as dates."""
    return (np.asarray(t_s, dtype=float) * 1e3).astype("datetime64[ms]")


def broken_at_gaps(gaps: list[dict], at_s: np.ndarray, *values: np.ndarray) -> list[np.ndarray]:
    """Insert a NaN point in the middle of every gap that has data on both sides, so lines and
    bands are not drawn across it; returns [at_s, *values] with the breaks (at_s sorted)."""
    t = np.asarray(at_s, dtype=float)
    middles = np.array([(g["start_s"] + g["end_s"]) / 2 for g in gaps], dtype=float)
    middles = middles[(middles > t.min()) & (middles < t.max())] if t.size else middles[:0]
    where = np.searchsorted(t, middles)
    return [np.insert(t, where, middles)] + [np.insert(np.asarray(v, dtype=float), where, np.nan) for v in values]


def _events(ax: plt.Axes, data: ReportData) -> None:
    for gap in data.gaps:
        ax.axvspan(*utc_dates([gap["start_s"], gap["end_s"]]), color="0.85", zorder=0, lw=0)
    for trip in data.trips:
        ax.axvline(utc_dates([trip["at_s"]])[0], color="#d62728", lw=1.0, zorder=3)


def _time_axis(ax: plt.Axes) -> None:
    locator = mdates.AutoDateLocator()
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))
    ax.set_xlabel("time (UTC)")


def _empty(ax: plt.Axes, text: str) -> None:
    ax.text(0.5, 0.5, text, ha="center", va="center", transform=ax.transAxes, color="0.4")


def _field(ax: plt.Axes, ax_res: plt.Axes | None, data: ReportData) -> None:
    r = data.readings
    ok = np.isfinite(r["field_nt"])
    _events(ax, data)
    if not ok.any():
        _empty(ax, "no field readings")
        return
    t_s, b, sd = broken_at_gaps(data.gaps, r["at_s"][ok], r["field_nt"][ok], np.nan_to_num(r["field_sd_nt"][ok]))
    t = utc_dates(t_s)
    ax.fill_between(t, b - 2 * sd, b + 2 * sd, color=BAND_COLOURS[1], label="+/- 2 sd", lw=0)
    ax.fill_between(t, b - sd, b + sd, color=BAND_COLOURS[0], label="+/- 1 sd", lw=0)
    ax.plot(t, b, ".-" if b.size < 200 else "-", color="#08519c", lw=0.8, ms=3, label="total field")
    ax.set_ylabel("field (nT)")
    ax.ticklabel_format(axis="y", useOffset=False)
    ax.legend(loc="best", fontsize=8)
    if ax_res is not None:
        _events(ax_res, data)
        finite = np.isfinite(b)
        window = min(LOCAL_FIT_READINGS, int(finite.sum()) - (1 - int(finite.sum()) % 2))  # odd, <= n
        residual = np.full_like(b, np.nan)
        if window >= 3:
            residual[finite] = b[finite] - savgol_filter(b[finite], window, min(2, window - 1), mode="interp")
        ax_res.fill_between(t, -2 * sd, 2 * sd, color=BAND_COLOURS[1], lw=0)
        ax_res.fill_between(t, -sd, sd, color=BAND_COLOURS[0], lw=0)
        ax_res.plot(t, residual, ".", color="#08519c", ms=3)
        ax_res.axhline(0.0, color="0.3", lw=0.6)
        ax_res.set_ylabel(f"minus local fit\n({window} readings) (nT)")


def _series(ax: plt.Axes, data: ReportData, key: str, sd_key: str | None, label: str, colour: str) -> None:
    r = data.readings
    _events(ax, data)
    ok = np.isfinite(r[key])
    if not ok.any():
        _empty(ax, f"no {label}")
        return
    sd_values = np.nan_to_num(r[sd_key][ok]) if sd_key is not None else np.zeros(int(ok.sum()))
    t_s, v, sd = broken_at_gaps(data.gaps, r["at_s"][ok], r[key][ok], sd_values)
    t = utc_dates(t_s)
    if sd_key is not None:
        ax.fill_between(t, v - sd, v + sd, color=colour, alpha=0.25, lw=0)
    ax.plot(t, v, ".-" if v.size < 200 else "-", color=colour, lw=0.8, ms=3)
    ax.set_ylabel(label)


def _temperature(ax: plt.Axes, data: ReportData) -> None:
    _events(ax, data)
    if not data.temperature_c.size:
        _empty(ax, "no coil temperature readings")
        return
    t_s, temperature_c = broken_at_gaps(data.gaps, data.temperature_at_s, data.temperature_c)
    ax.plot(utc_dates(t_s), temperature_c, color="#e6550d", lw=0.8, label="coil")
    limit = data.temperature_limit_c
    low, high = float(np.nanmin(temperature_c)), float(np.nanmax(temperature_c))
    if limit is not None and limit <= high + 2 * max(high - low, 5.0):
        ax.axhline(limit, color="#d62728", ls="--", lw=0.8, label="limit")
    elif limit is not None:
        ax.text(0.01, 0.95, f"limit {limit:g} C (above the plotted range)", transform=ax.transAxes, va="top",
                fontsize=8, color="#d62728")
    ax.set_ylabel("coil (C)")
    ax.legend(loc="best", fontsize=8)


def _events_strip(ax: plt.Axes, data: ReportData) -> None:
    _events(ax, data)
    for trip in data.trips:
        ax.text(utc_dates([trip["at_s"]])[0], 0.5, f" {trip['check_name']}", color="#d62728", fontsize=7,
                va="center", rotation=90)
    if not data.gaps and not data.trips:
        _empty(ax, "no gaps, no trips")
    ax.set_yticks([])
    ax.set_ylabel("gaps (grey)\ntrips (red)")


def _save(fig: plt.Figure, path: Path, title: str) -> Path:
    fig.suptitle(title, fontsize=10)
    fig.savefig(path, dpi=DPI)
    plt.close(fig)
    return path


def _time_figure(rows: int, height_in: float) -> tuple[plt.Figure, np.ndarray]:
    fig, axes = plt.subplots(rows, 1, sharex=True, figsize=(10, height_in), layout="constrained", squeeze=False)
    return fig, axes[:, 0]


def plot_all(data: ReportData, out_dir: Path, title: str) -> list[Path]:
    """Write the report's PNGs into out_dir; return their paths."""
    paths = []
    fig, (ax, ax_res) = _time_figure(2, 6)
    _field(ax, ax_res, data)
    _time_axis(ax_res)
    paths.append(_save(fig, out_dir / "field.png", f"Total field - {title}"))

    fig, (a1, a2) = _time_figure(2, 5)
    _series(a1, data, "t2star_s", "t2star_sd_s", "T2* (s)", "#31a354")
    _series(a2, data, "snr", None, "SNR", "#756bb1")
    _time_axis(a2)
    paths.append(_save(fig, out_dir / "t2star_snr.png", f"T2* and SNR - {title}"))

    fig, (a1,) = _time_figure(1, 3.5)
    _temperature(a1, data)
    _time_axis(a1)
    paths.append(_save(fig, out_dir / "coil_temperature.png", f"Coil temperature - {title}"))

    fig, axes = plt.subplots(1, 1, figsize=(10, 4.5), layout="constrained")
    _noise(axes, data)
    paths.append(_save(fig, out_dir / "noise_spectrum.png", f"Noise spectrum - {title}"))

    fig, axes = _time_figure(5, 11)
    _field(axes[0], None, data)
    _series(axes[1], data, "t2star_s", "t2star_sd_s", "T2* (s)", "#31a354")
    _series(axes[2], data, "snr", None, "SNR", "#756bb1")
    _temperature(axes[3], data)
    _events_strip(axes[4], data)
    _time_axis(axes[4])
    paths.append(_save(fig, out_dir / "overview.png", f"Overview - {title}"))
    return paths


def _noise(ax: plt.Axes, data: ReportData) -> None:
    noise = data.noise
    if noise is None:
        _empty(ax, "no raw samples in the selection (compacted?)")
        return
    for name, asd in noise.asd_nv_per_rthz.items():
        ax.semilogy(noise.frequency_hz, asd, lw=0.7, label=name)
    larmor = data.readings["frequency_hz"]
    if np.isfinite(larmor).any():
        ax.axvline(float(np.nanmedian(larmor)), color="#d62728", ls=":", lw=0.8, label="Larmor (median)")
    ax.set_xlim(0, min(float(noise.frequency_hz[-1]), 5000.0))
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("ASD at the coil (nV/sqrt(Hz))")
    ax.set_title(f"Welch average of the acquisition windows of {noise.shots} shot(s)", fontsize=9)
    ax.grid(True, which="both", lw=0.3, alpha=0.5)
    ax.legend(loc="upper right", fontsize=8)
