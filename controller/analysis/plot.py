"""A PNG of an analysis: trace with fitted envelope, residual, spectra before and after noise removal.

The trace panel shows the envelope |x^a(t)| of the cleaned, band-limited record (x^a its
analytic signal) against the fitted A exp(-t/T2*), with the first 10 ms of the carrier and
the fit in an inset (a second of a 2 kHz carrier would be a solid band).

matplotlib with the Agg backend (no display needed).  Units: seconds after time zero,
the record's units (volts for stored runs, full scale for WAV files), Hz, and nT on a
second axis of the line's close-up (B = f / (gamma / 2 pi)).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from scipy.signal import hilbert

from controller.analysis.result import AnalysisResult
from controller.errors import InputError


def _db(values: np.ndarray) -> np.ndarray:
    return 20 * np.log10(np.maximum(values, 1e-300))


def plot_analysis(result: AnalysisResult, path: str | Path, title: str = "", units: str = "V",
                  time_label: str = "time after switch-off / pulse end (s)") -> None:
    """Write the four-panel figure to path (PNG); result must come from an analysis with display=True."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    d = result.display
    if d is None:
        raise ValueError("the result carries no display data (analyse with display=True)")
    fig, axes = plt.subplots(4, 1, figsize=(10, 12), constrained_layout=True)
    head = title or "FID analysis"
    if result.detected:
        head += (f"\nf = {result.frequency_hz:.4f} ± {result.frequency_sd_hz:.4f} Hz,  "
                 f"B = {result.field_nt:.2f} ± {result.field_sd_nt:.2f} nT,  "
                 f"T2* = {result.t2star_s:.3f} ± {result.t2star_sd_s:.3f} s,  SNR {result.snr:.1f}")
    else:
        head += "\nno FID detected (" + result.detection_reason + ")"
    mains = f"mains {result.mains_hz:.3f} Hz" if result.mains_hz else "no mains hum found"
    head += (f"\n{result.shots} shot(s), dead time {result.dead_time_s * 1e3:.1f} ms, {mains}, "
             f"{result.spikes_replaced} spike samples replaced")
    fig.suptitle(head, fontsize=10)

    ax = axes[0]
    lo, hi = d.passband_hz
    step = max(1, d.times_s.size // 4000)
    envelope = np.abs(hilbert(d.trace))
    ax.plot(d.times_s[::step], envelope[::step], lw=0.7, color="0.2", label=f"envelope of the cleaned record ({lo:.0f}-{hi:.0f} Hz)")
    if result.detected:
        ax.plot(d.times_s, d.envelope, color="tab:red", lw=1.5, label="fitted envelope A exp(-t/T2*)")
    ax.set_xlabel(time_label)
    ax.set_ylabel(f"signal ({units})")
    ax.set_ylim(bottom=0)
    ax.legend(loc="upper right", fontsize=8)
    ax.set_title("trace" + (" (stack, phase-aligned)" if d.shots > 1 else ""), fontsize=9)
    inset = ax.inset_axes([0.06, 0.08, 0.34, 0.38])
    first = d.times_s <= d.times_s[0] + 0.01
    inset.plot(d.times_s[first] * 1e3, d.trace[first], lw=0.8, color="0.3", label="record")
    if result.detected:
        inset.plot(d.times_s[first] * 1e3, d.fit[first], lw=0.8, ls="--", color="tab:blue", label="fit")
    inset.set_title("first 10 ms (ms)", fontsize=7)
    inset.tick_params(labelsize=6)

    ax = axes[1]
    ax.plot(d.times_s, d.residual, lw=0.3, color="tab:gray", rasterized=True)
    ax.set_xlabel(time_label)
    ax.set_ylabel(f"residual ({units})")
    ax.set_title("residual: cleaned record minus fitted FID, same pass band", fontsize=9)

    ax = axes[2]
    ax.plot(d.spectrum_hz, _db(d.spectrum_before), lw=0.5, color="tab:orange", label="before noise removal")
    ax.plot(d.spectrum_hz, _db(d.spectrum_after), lw=0.5, color="tab:blue", label="after noise removal")
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel(f"amplitude (dB re 1 {units})")
    ax.legend(loc="upper right", fontsize=8)
    ax.set_title("spectrum over the analysis band (apodised, zero-filled)", fontsize=9)

    ax = axes[3]
    width = max(5.0, 8.0 / (np.pi * d.t2star_s)) if np.isfinite(d.t2star_s) and d.t2star_s > 0 else 20.0
    near = np.abs(d.spectrum_hz - d.frequency_hz) <= width
    ax.plot(d.spectrum_hz[near], d.spectrum_before[near], lw=0.8, color="tab:orange", label="before")
    ax.plot(d.spectrum_hz[near], d.spectrum_after[near], lw=0.8, color="tab:blue", label="after")
    if result.detected:
        ax.plot(d.spectrum_hz[near], d.spectrum_fit[near], lw=1.0, ls="--", color="tab:red", label="fitted line")
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel(f"amplitude ({units})")
    ax.legend(loc="upper right", fontsize=8)
    ax.set_title("close-up of the line", fontsize=9)
    g = result.gamma_hz_per_nt
    top = ax.secondary_xaxis("top", functions=(lambda f: f / g, lambda b: b * g))
    top.set_xlabel("field (nT)")
    try:
        fig.savefig(path, dpi=110)
    except OSError as exc:
        raise InputError(f"{path}: cannot write the plot ({exc.strerror or exc})") from None
    finally:
        plt.close(fig)
