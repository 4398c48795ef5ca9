"""The FID analysis pipeline: one or more shots in, one AnalysisResult out.

Public API (stable; used by `precess run` for live and stored analysis and by `precess analyze`):

    ShotData            one shot's samples (channels x samples) and timing
    AnalysisOptions     channel, reference channels, band, mains, gamma
    prepare_shot(shot, options) -> PreparedShot          steps 1-5, per shot (cache it when live)
    analyse_prepared(prepared, options, display=False) -> AnalysisResult    steps 6-10
    analyse_shots(shots, options, display=False) -> AnalysisResult          both
    AnalysisResult.as_dict()   the JSON fields (controller.analysis.result)

Per shot:
 1. blanking of overload and ringing after the first usable sample (blanking module);
 2. despiking of every channel used (despike module);
 3. DFT of the usable window (signal and references);
 4. mains comb: fundamental to mHz and harmonic amplitudes (mains module);
 5. a band spectrum cleaned of the comb and, block-wise, of what the references explain
    (reference module), for the line search.
For the set of shots:
 6. line search: the largest summed power in the band (spectrum module);
 7. mains refit with the line's neighbourhood (+/- the fit window) left out, then the joint
    fit of the FID with the harmonics and references near it over all shots (linefit module);
 8. the FID model subtracted, the comb refitted on every harmonic, the joint fit repeated
    with each shot weighted by its own noise;
 9. the detection decision (detection module);
10. field from frequency, B = f / (gamma / 2 pi), sd(B) = sd(f) / (gamma / 2 pi).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.fft import rfft

from controller.analysis.blanking import Blanking, find_usable_start
from controller.analysis.despike import despike
from controller.analysis.detection import decide
from controller.analysis.linefit import LineFit, ShotSpectrum, fid_spectrum, fit_line, window_half_width_hz
from controller.analysis.mains import NOMINALS_HZ, MainsFit, comb_bins, estimate_mains, fit_mains, mains_spectrum, refit_mains
from controller.analysis.reference import cancel_references
from controller.analysis.result import AnalysisResult, build_result

__all__ = ["ShotData", "AnalysisOptions", "PreparedShot", "AnalysisResult", "prepare_shot", "analyse_prepared",
           "analyse_shots", "joint_fit", "line_search_hz", "check_options", "gamma_value", "DEFAULT_BAND_HZ"]
from controller.analysis.spectrum import band_bins, peak_frequency_hz
from controller.errors import InputError
from controller.physics.constants import gamma_hz_per_nt

DEFAULT_BAND_HZ = (1000.0, 3500.0)
MIN_WINDOW_S = 0.02
MIN_WINDOW_SAMPLES = 256
MAINS_MARGIN_HZ = 250.0
LINE_SEARCH_HALF_WIDTH_BINS = 8


@dataclass(frozen=True)
class ShotData:
    """One shot: samples (n_channels, n_samples) and where time zero and the usable data begin.

    time_zero_sample: end of the switch-off ramp or of the last pulse (0 for a bare recording).
    first_sample: the earliest sample the analysis may use (the acquisition start).
    n_samples: how many samples from first_sample belong to the acquisition (None: all).
    full_scale: the converter's full scale in the samples' units, if known (overload test).
    """

    samples: np.ndarray
    sample_rate_hz: float
    channel_names: tuple[str, ...]
    time_zero_sample: int = 0
    first_sample: int = 0
    n_samples: int | None = None
    full_scale: float | None = None
    label: str = ""


@dataclass(frozen=True)
class AnalysisOptions:
    channel: int = 0
    reference_channels: tuple[int, ...] = ()
    band_hz: tuple[float, float] = DEFAULT_BAND_HZ
    mains: str = "auto"  # "50", "60" or "auto"
    gamma: str | float = "shielded"  # "shielded", "free", "iaga2006" or Hz/nT
    blank: bool = True
    despike: bool = True


@dataclass(frozen=True)
class PreparedShot:
    """A shot after steps 1-5."""

    label: str
    sample_rate_hz: float
    start_s: float  # first usable sample after time zero
    blanking: Blanking
    spikes_replaced: int
    window: np.ndarray  # despiked signal, usable window
    window_raw: np.ndarray  # signal before despiking, same window
    references: tuple[np.ndarray, ...]  # despiked references, same window
    spectrum: np.ndarray
    reference_spectra: tuple[np.ndarray, ...]
    mains: MainsFit | None
    band_bins: np.ndarray
    band_clean: np.ndarray  # complex, on band_bins

    @property
    def n_samples(self) -> int:
        return self.window.size


def check_options(shot: ShotData, options: AnalysisOptions) -> None:
    """InputError for a channel that does not exist or a band outside (0, Nyquist)."""
    n_channels = shot.samples.shape[0]
    for ch in (options.channel, *options.reference_channels):
        if not 0 <= ch < n_channels:
            names = ", ".join(f"{i}={n}" for i, n in enumerate(shot.channel_names)) or f"0..{n_channels - 1}"
            raise InputError(f"{shot.label or 'record'}: channel {ch} does not exist (channels: {names})")
    if options.channel in options.reference_channels:
        raise InputError(f"channel {options.channel} cannot be both the signal and a reference")
    low, high = options.band_hz
    nyquist = shot.sample_rate_hz / 2
    if not 0 < low < high < nyquist:
        raise InputError(f"band {low:g}:{high:g} Hz must satisfy 0 < LOW < HIGH < Nyquist = {nyquist:g} Hz")
    if options.mains not in ("auto", "50", "60"):
        raise InputError(f"mains {options.mains!r}: allowed are 50, 60 or auto")


def prepare_shot(shot: ShotData, options: AnalysisOptions) -> PreparedShot:
    """Steps 1-5 of the module docstring for one shot."""
    check_options(shot, options)
    fs = float(shot.sample_rate_hz)
    samples = np.asarray(shot.samples)
    signal = np.asarray(samples[options.channel], dtype=float)
    end = signal.size if shot.n_samples is None else min(signal.size, shot.first_sample + shot.n_samples)
    first = max(0, shot.first_sample)
    nominal = NOMINALS_HZ if options.mains == "auto" else (float(options.mains),)
    blanking = (find_usable_start(signal[:end], first, fs, shot.full_scale, nominal) if options.blank
                else Blanking(first, None, None, None))
    start = blanking.start_sample
    if end - start < max(MIN_WINDOW_SAMPLES, MIN_WINDOW_S * fs):
        raise InputError(f"{shot.label or 'record'}: only {max(0, end - start)} usable samples after "
                         f"{(start - shot.time_zero_sample) / fs * 1e3:.1f} ms of blanking ({blanking.reason});"
                         f" need at least {max(MIN_WINDOW_SAMPLES, int(MIN_WINDOW_S * fs))}")
    raw = signal[start:end].copy()
    cleaned = despike(raw, fs) if options.despike else None
    window = cleaned.cleaned if cleaned is not None else raw
    refs = tuple(despike(np.asarray(samples[ch, start:end], dtype=float), fs).cleaned if options.despike
                 else np.asarray(samples[ch, start:end], dtype=float) for ch in options.reference_channels)
    n = window.size
    spectrum = rfft(window)
    ref_spectra = tuple(rfft(r) for r in refs)
    top = min(options.band_hz[1] + MAINS_MARGIN_HZ, fs / 2)
    mains = estimate_mains(spectrum, n, fs, options.mains if options.mains == "auto" else float(options.mains), top)
    bins = band_bins(n, fs, options.band_hz)
    clean = spectrum[bins] - (mains_spectrum(bins, n, fs, mains, LINE_SEARCH_HALF_WIDTH_BINS) if mains else 0)
    if ref_spectra:
        ref_clean = []
        for r in ref_spectra:
            comb = fit_mains(r, n, fs, mains.fundamental_hz, mains.harmonics, iterations=0) if mains else None
            full = np.array(r, dtype=complex)
            if comb is not None:
                full[bins] -= mains_spectrum(bins, n, fs, comb, LINE_SEARCH_HALF_WIDTH_BINS)
            ref_clean.append(full)
        spectrum_clean = np.array(spectrum, dtype=complex)
        spectrum_clean[bins] = clean
        clean = cancel_references(spectrum_clean, ref_clean, bins, fs / n)
    return PreparedShot(label=shot.label, sample_rate_hz=fs, start_s=(start - shot.time_zero_sample) / fs,
                        blanking=blanking, spikes_replaced=cleaned.replaced_samples if cleaned else 0,
                        window=window, window_raw=raw, references=refs, spectrum=spectrum,
                        reference_spectra=ref_spectra, mains=mains, band_bins=bins, band_clean=clean)


def line_search_hz(prepared: list[PreparedShot]) -> float:
    """Step 6: the interpolated peak of the summed power of the shots sharing the first shot's length."""
    first = prepared[0]
    power = np.zeros(first.spectrum.size)
    for p in prepared:
        if p.n_samples == first.n_samples:
            power[p.band_bins] += np.abs(p.band_clean) ** 2
    return peak_frequency_hz(power, first.band_bins, first.sample_rate_hz / first.n_samples)


def _spectra(prepared: list[PreparedShot], mains: list[MainsFit | None]) -> list[ShotSpectrum]:
    return [ShotSpectrum(p.spectrum, p.n_samples, p.sample_rate_hz, p.start_s, m, p.reference_spectra)
            for p, m in zip(prepared, mains)]


def joint_fit(prepared: list[PreparedShot]) -> tuple[LineFit, list[MainsFit | None]]:
    """Steps 6-8: line search, mains refit without the line's neighbourhood, joint fit, refit.

    Returns the final fit and each shot's final mains fit.
    """
    f_start = line_search_hz(prepared)
    half = window_half_width_hz([_spectra(prepared, [None] * len(prepared))[0]], 0.0)
    exclude = ((f_start - half, f_start + half),)
    mains = [refit_mains(p.spectrum, p.n_samples, p.sample_rate_hz, p.mains, exclude) if p.mains else None
             for p in prepared]
    fit = fit_line(_spectra(prepared, mains), f_start)
    refined = []
    for p, m, line in zip(prepared, mains, fit.shots):
        if m is None:
            refined.append(None)
            continue
        bins = comb_bins(m, p.n_samples, p.sample_rate_hz)
        without_fid = np.array(p.spectrum, dtype=complex)
        without_fid[bins] -= fid_spectrum(bins, p.n_samples, p.sample_rate_hz, fit.frequency_hz, fit.rate_per_s,
                                          line.coefficients)
        refined.append(refit_mains(without_fid, p.n_samples, p.sample_rate_hz, m, coupled=True))
    weights = [1.0 / line.noise_sd if line.noise_sd > 0 else 1.0 for line in fit.shots] if len(prepared) > 1 else None
    final = fit_line(_spectra(prepared, refined), fit.frequency_hz, fit.rate_per_s, weights)
    return final, refined


def gamma_value(gamma: str | float) -> float:
    """gamma/2pi in Hz/nT from a name or a number; InputError otherwise."""
    try:
        value = gamma_hz_per_nt(gamma)
    except KeyError:
        raise InputError(f"gamma {gamma!r}: allowed are shielded, free, iaga2006 or a value in Hz/nT") from None
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"gamma {gamma!r} must be a positive value in Hz/nT")
    return value


def analyse_prepared(prepared: list[PreparedShot], options: AnalysisOptions, display: bool = False) -> AnalysisResult:
    """Steps 6-10 of the module docstring on shots that went through prepare_shot."""
    if not prepared:
        raise InputError("no shots to analyse")
    gamma = gamma_value(options.gamma)
    fit, mains = joint_fit(prepared)
    first = prepared[0]
    decision = decide(fit.detection_statistic, len(prepared), fit.degrees_of_freedom, first.band_bins.size,
                      fit.rate_per_s, fit.rate_sd_per_s, fit.frequency_hz, options.band_hz)
    return build_result(prepared, mains, fit, decision, options, gamma, display)


def analyse_shots(shots: list[ShotData], options: AnalysisOptions | None = None, display: bool = False) -> AnalysisResult:
    """prepare_shot on every shot, then analyse_prepared."""
    options = options or AnalysisOptions()
    return analyse_prepared([prepare_shot(s, options) for s in shots], options, display)
