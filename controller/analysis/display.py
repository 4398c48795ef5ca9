"""What a plot of an analysis shows, as arrays in physical units (computed only when asked for).

- the noise-cleaned record: the full mains model (every harmonic, exact line shape) removed
  in the frequency domain, the references' block-Wiener estimate removed in the band;
- the trace and the fitted FID band-limited to +/- DISPLAY_HALF_WIDTH_HZ (at least the fit
  window) around the line, with a raised-cosine taper TAPER_HZ wide at the edges, so the
  FID is visible under noise that lies elsewhere in the spectrum; shots are stacked with
  phase alignment (stack module); the fit's envelope +/- A e^{-t/T2*};
- spectra before (raw record) and after noise removal, apodised and zero-filled
  (spectrum module), over the analysis band.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from scipy.fft import irfft

from controller.analysis.linefit import LineFit
from controller.analysis.mains import MainsFit, fit_mains, mains_spectrum
from controller.analysis.reference import cancel_references
from controller.analysis.spectrum import display_spectrum
from controller.analysis.stack import common_window, cut_to_window, stack_aligned

if TYPE_CHECKING:
    from controller.analysis.pipeline import AnalysisOptions, PreparedShot

DISPLAY_HALF_WIDTH_HZ = 60.0
TAPER_HZ = 10.0


@dataclass(frozen=True)
class DisplayData:
    times_s: np.ndarray  # after time zero
    trace: np.ndarray  # cleaned, band-limited, stacked
    fit: np.ndarray  # fitted FID, band-limited the same way
    envelope: np.ndarray  # A0 exp(-t / T2*)
    residual: np.ndarray
    passband_hz: tuple[float, float]
    spectrum_hz: np.ndarray
    spectrum_before: np.ndarray
    spectrum_after: np.ndarray
    spectrum_fit: np.ndarray
    frequency_hz: float
    t2star_s: float
    shots: int


def cleaned_spectrum(p: "PreparedShot", mains: MainsFit | None, fid_model: np.ndarray, margin_hz: float) -> np.ndarray:
    """The shot's spectrum without the mains model and what the references explain, over the band +/- margin.

    The references' transfer functions are estimated on the spectrum minus the fitted FID
    (fid_model, the FID's DFT on every bin), so the FID cannot leak into them.  Bins
    outside the band +/- margin are returned as recorded.
    """
    df = p.sample_rate_hz / p.n_samples
    lo = max(1, int((p.band_bins[0] * df - margin_hz) / df))
    hi = min(p.spectrum.size - 1, int((p.band_bins[-1] * df + margin_hz) / df))
    bins = np.arange(lo, hi + 1)
    clean = np.array(p.spectrum, dtype=complex)
    if mains is not None:
        clean[bins] -= mains_spectrum(bins, p.n_samples, p.sample_rate_hz, mains)
    if p.reference_spectra:
        refs = []
        for r in p.reference_spectra:
            r = np.array(r, dtype=complex)
            if mains is not None:
                comb = fit_mains(r, p.n_samples, p.sample_rate_hz, mains.fundamental_hz, mains.harmonics, coupled=True,
                                 iterations=0)
                r[bins] -= mains_spectrum(bins, p.n_samples, p.sample_rate_hz, comb)
            refs.append(r)
        without_fid = clean - fid_model
        explained = without_fid[bins] - cancel_references(without_fid, refs, bins, df)
        clean[bins] -= explained
    return clean


def passband(n_bins: int, bin_hz: float, centre_hz: float, half_width_hz: float) -> np.ndarray:
    """Raised-cosine pass band: 1 within half_width - TAPER_HZ of the centre, 0 beyond half_width."""
    distance = np.abs(np.arange(n_bins) * bin_hz - centre_hz)
    edge = np.clip((distance - (half_width_hz - TAPER_HZ)) / TAPER_HZ, 0.0, 1.0)
    return 0.5 * (1.0 + np.cos(np.pi * edge))


def fid_trace(times_s: np.ndarray, frequency_hz: float, rate_per_s: float, amplitude: float, phase_rad: float) -> np.ndarray:
    """A0 exp(-r t) cos(2 pi f t + phi0)."""
    return amplitude * np.exp(-rate_per_s * times_s) * np.cos(2 * math.pi * frequency_hz * times_s + phase_rad)


def build_display(prepared: "list[PreparedShot]", mains: list[MainsFit | None], fit: LineFit,
                  options: "AnalysisOptions") -> DisplayData:
    """Arrays for the plot (module docstring)."""
    fs = prepared[0].sample_rate_hz
    half = max(DISPLAY_HALF_WIDTH_HZ, fit.half_width_hz)
    starts = [p.start_s for p in prepared]
    start, length = common_window(starts, [p.n_samples for p in prepared], fs)
    clean_full, clean_band, model_band, raw_full = [], [], [], []
    for p, m, line in zip(prepared, mains, fit.shots):
        t = p.start_s + np.arange(p.n_samples) / fs
        model = fid_trace(t, fit.frequency_hz, fit.rate_per_s, line.amplitude, line.phase_rad)
        model_spec = np.fft.rfft(model)
        spectrum = cleaned_spectrum(p, m, model_spec, half + TAPER_HZ)
        gain = passband(spectrum.size, fs / p.n_samples, fit.frequency_hz, half)
        for target, values in ((clean_full, irfft(spectrum, p.n_samples)), (clean_band, irfft(spectrum * gain, p.n_samples)),
                               (model_band, irfft(model_spec * gain, p.n_samples)), (raw_full, p.window_raw)):
            target.append(cut_to_window(values, p.start_s, start, length, fs))
    phases = [line.phase_rad for line in fit.shots]
    amplitudes = [line.amplitude for line in fit.shots]
    trace = stack_aligned(clean_band, phases, amplitudes)
    model = stack_aligned(model_band, phases, amplitudes)
    after = stack_aligned(clean_full, phases, amplitudes)
    before = stack_aligned(raw_full, phases, amplitudes)
    times = start + np.arange(length) / fs
    t2 = fit.t2star_s if math.isfinite(fit.t2star_s) and fit.t2star_s > 0 else None
    freqs, spec_before = display_spectrum(before, fs, t2)
    _, spec_after = display_spectrum(after, fs, t2)
    _, spec_fit = display_spectrum(fid_trace(times, fit.frequency_hz, fit.rate_per_s, fit.amplitude, fit.phase_rad), fs, t2)
    keep = (freqs >= options.band_hz[0]) & (freqs <= options.band_hz[1])
    return DisplayData(times_s=times, trace=trace, fit=model,
                       envelope=fit.amplitude * np.exp(-fit.rate_per_s * times), residual=trace - model,
                       passband_hz=(fit.frequency_hz - half, fit.frequency_hz + half), spectrum_hz=freqs[keep],
                       spectrum_before=spec_before[keep], spectrum_after=spec_after[keep], spectrum_fit=spec_fit[keep],
                       frequency_hz=fit.frequency_hz, t2star_s=fit.t2star_s, shots=len(prepared))
