"""Noise survey from receive-only records: input-referred spectrum, mains lines, noise density.

* Power spectral density by Welch's method (Hann window, 50 % overlap, one-sided, V^2/Hz)
  [pub: Welch, IEEE Trans. AU-15:70 (1967)], averaged over records, divided by the receive
  chain's power gain G^2 |H(f)|^2 with H the first-order high-pass (AC coupling) at f_c:
  |H| = (f/f_c) / sqrt(1 + (f/f_c)^2).  So densities are referred to the coil (the input).
* Impulses are blanked first (demodulate.impulse_mask); the power lost is restored by the
  fraction of samples kept.
* Mains: each harmonic's frequency from the peak of a zero-padded Hann spectrum with
  parabolic interpolation of the log magnitude [common practice, no source]; the
  fundamental is the mean of f_h / h weighted by (h A_h)^2; each line's amplitude is the
  magnitude of the complex demodulation mean 2/N sum s exp(-i 2 pi f_h t) at its frequency.
* Noise density in a band: sqrt of the mean PSD over bins further than `line_guard_hz` from
  every mains harmonic; its sd from the scatter of those bins.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.signal import csd, welch

from controller.analysis.demodulate import impulse_mask


@dataclass(frozen=True)
class Spectrum:
    frequencies_hz: np.ndarray
    psd_v2_per_hz: np.ndarray  # input-referred


def highpass_magnitude(frequencies_hz: np.ndarray, corner_hz: float) -> np.ndarray:
    """|H(f)| of a first-order high-pass: (f/fc) / sqrt(1 + (f/fc)^2); 1 when corner_hz is 0."""
    f = np.asarray(frequencies_hz, dtype=float)
    if corner_hz <= 0:
        return np.ones_like(f)
    r = f / corner_hz
    return r / np.sqrt(1.0 + r**2)


def blank_impulses(record: np.ndarray) -> tuple[np.ndarray, float]:
    """The record with impulsive samples set to zero (after removing the mean), and the fraction kept."""
    x = np.asarray(record, dtype=float) - float(np.mean(record))
    usable = impulse_mask(x)
    return np.where(usable, x, 0.0), float(usable.mean()) if usable.size else 1.0


def input_referred_psd(records: list[np.ndarray], sample_rate_hz: float, gain: float, highpass_hz: float,
                       segment_s: float = 0.5) -> Spectrum:
    """Mean Welch PSD of the records, referred to the input; see module docstring."""
    nper = max(16, int(round(segment_s * sample_rate_hz)))
    total = None
    for record in records:
        x, kept = blank_impulses(record)
        f, p = welch(x, fs=sample_rate_hz, window="hann", nperseg=min(nper, x.size), detrend="constant")
        p = p / max(kept, 1e-9)
        total = p if total is None else total + p
    if total is None:
        raise ValueError("no records to analyse")
    response = gain * highpass_magnitude(f, highpass_hz)
    with np.errstate(divide="ignore"):
        psd = np.where(response > 0, total / len(records) / response**2, np.inf)
    return Spectrum(frequencies_hz=f, psd_v2_per_hz=psd)


def padded_spectrum(record: np.ndarray, pad: int = 16) -> np.ndarray:
    """|FFT| of the mean-removed, Hann-windowed record zero-padded to pad times its length."""
    x = np.asarray(record, dtype=float)
    return np.abs(np.fft.rfft((x - x.mean()) * np.hanning(x.size), x.size * pad))


def peak_frequency_hz(spectrum: np.ndarray, bin_hz: float, near_hz: float, half_width_hz: float) -> float:
    """Frequency of the largest peak of a padded spectrum within near_hz +/- half_width_hz
    (parabolic interpolation of log |X| around the largest bin)."""
    lo = max(1, int((near_hz - half_width_hz) / bin_hz))
    hi = min(spectrum.size - 2, int((near_hz + half_width_hz) / bin_hz))
    if hi <= lo:
        return near_hz
    k = lo + int(np.argmax(spectrum[lo:hi + 1]))
    a, b, c = np.log(spectrum[k - 1:k + 2] + 1e-300)
    denom = a - 2 * b + c
    shift = 0.5 * (a - c) / denom if denom != 0 else 0.0
    return (k + float(np.clip(shift, -0.5, 0.5))) * bin_hz


def line_amplitude(record: np.ndarray, sample_rate_hz: float, frequency_hz: float) -> float:
    """|2/N sum s(k) exp(-i 2 pi f k / fs)|: the amplitude of a sinusoid at frequency_hz."""
    x = np.asarray(record, dtype=float)
    k = np.arange(x.size)
    return float(abs(2.0 * np.mean((x - x.mean()) * np.exp(-2j * np.pi * frequency_hz * k / sample_rate_hz))))


def harmonic_amplitudes(record: np.ndarray, sample_rate_hz: float, fundamental_hz: float, count: int) -> np.ndarray:
    """line_amplitude at h f1 for h = 1..count, with exp(-i 2 pi h f1 k/fs) built by repeated multiplication."""
    x = np.asarray(record, dtype=float)
    x = x - x.mean()
    step = np.exp(-2j * np.pi * fundamental_hz * np.arange(x.size) / sample_rate_hz)
    power = np.ones_like(step)
    out = np.empty(count)
    for h in range(count):
        power *= step
        out[h] = abs(2.0 * np.mean(x * power))
    return out


def mains_fundamental_hz(records: list[np.ndarray], sample_rate_hz: float, nominal_hz: float,
                         harmonics: int = 11) -> float:
    """Weighted mean of f_h / h over the odd harmonics h <= `harmonics` of every record."""
    num = den = 0.0
    pad = 16
    for record in records:
        spectrum = padded_spectrum(record, pad)
        bin_hz = sample_rate_hz / (len(record) * pad)
        for h in range(1, harmonics + 1, 2):
            if h * nominal_hz * 1.02 >= sample_rate_hz / 2:
                break
            f = peak_frequency_hz(spectrum, bin_hz, h * nominal_hz, 0.02 * h * nominal_hz)
            weight = (h * line_amplitude(record, sample_rate_hz, f)) ** 2
            num += weight * f / h
            den += weight
    return num / den if den > 0 else nominal_hz


def mains_lines(records: list[np.ndarray], sample_rate_hz: float, fundamental_hz: float, gain: float,
                highpass_hz: float, max_frequency_hz: float) -> list[dict[str, float]]:
    """Every harmonic up to max_frequency_hz: its number, frequency and rms-over-records amplitude at the input (V)."""
    count = int(max_frequency_hz // fundamental_hz)
    if count < 1:
        return []
    amps = np.array([harmonic_amplitudes(r, sample_rate_hz, fundamental_hz, count) for r in records])
    rms = np.sqrt(np.mean(amps**2, axis=0))
    freqs = fundamental_hz * np.arange(1, count + 1)
    response = gain * highpass_magnitude(freqs, highpass_hz)
    return [{"harmonic": h + 1, "frequency_hz": float(freqs[h]), "amplitude_v": float(rms[h] / response[h])}
            for h in range(count)]


def band_density(spectrum: Spectrum, band_hz: tuple[float, float], fundamental_hz: float,
                 line_guard_hz: float = 4.0) -> tuple[float, float, int]:
    """(density V/sqrt(Hz), its sd, bins used) in band_hz, away from the mains harmonics."""
    f, p = spectrum.frequencies_hz, spectrum.psd_v2_per_hz
    inside = (f >= band_hz[0]) & (f <= band_hz[1]) & np.isfinite(p)
    nearest = np.abs(f - fundamental_hz * np.round(f / fundamental_hz))
    use = inside & (nearest > line_guard_hz)
    if use.sum() < 2:
        raise ValueError(f"band {band_hz[0]:.1f}-{band_hz[1]:.1f} Hz holds fewer than 2 bins clear of mains lines")
    mean = float(p[use].mean())
    sd_mean = float(p[use].std(ddof=1)) / math.sqrt(int(use.sum()))
    density = math.sqrt(mean)
    return density, 0.5 * sd_mean / density, int(use.sum())


def reference_coherence(signal_records: list[np.ndarray], reference_records: list[np.ndarray],
                        sample_rate_hz: float, band_hz: tuple[float, float], segment_s: float = 0.5) -> float:
    """Magnitude-squared coherence |Sxy|^2 / (Sxx Syy) of signal and reference, averaged over the band.

    Cross and auto spectra are summed over records before the ratio (Welch averaging).  A linear
    reference canceller removes at most -10 log10(1 - coherence) dB [mem: see REFERENCE.md, Noise].
    """
    sxy = sxx = syy = None
    for x, y in zip(signal_records, reference_records):
        nper = min(max(16, int(round(segment_s * sample_rate_hz))), len(x))
        x, _ = blank_impulses(x)
        y, _ = blank_impulses(y)
        f, pxy = csd(x, y, fs=sample_rate_hz, nperseg=nper)
        _, pxx = welch(x, fs=sample_rate_hz, nperseg=nper)
        _, pyy = welch(y, fs=sample_rate_hz, nperseg=nper)
        sxy = pxy if sxy is None else sxy + pxy
        sxx = pxx if sxx is None else sxx + pxx
        syy = pyy if syy is None else syy + pyy
    if sxy is None:
        raise ValueError("no reference records")
    inside = (f >= band_hz[0]) & (f <= band_hz[1])
    coherence = np.abs(sxy[inside]) ** 2 / np.maximum(sxx[inside] * syy[inside], 1e-300)
    return float(np.mean(coherence))
