"""The terminal UI's one door to the analysis: what the live views need from shots.

Everything the TUI shows that is computed from samples comes from here: the acquisition
window of a shot, its demodulated envelope, the amplitude spectrum around the Larmor line,
the running stack and the fit of the stack (or, for kinds other than FID, that kind's
analysis of the shots so far).  The fits are delegated to `controller.analysis`; switching
to another analysis pipeline means editing this module only.

All functions are pure (arrays in, new arrays out); `LiveStack` is the one piece of state,
a running sum owned by the analysis thread.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.signal import fftconvolve

from controller.analysis.by_kind import AnalysisContext, analyse_run, fid_band
from controller.analysis.demodulate import rotate_receiver_phase
from controller.analysis.fid_entry import fid_options, fid_shot, fit_fid
from controller.analysis.pipeline import DEFAULT_BAND_HZ, AnalysisResult, PreparedShot, analyse_prepared, prepare_shot
from controller.analysis.shots import receiver_phase_rad
from controller.analysis.sources import shot_from_record
from controller.errors import PrecessError
from controller.records import ShotAcquired
from controller.sequences.timeline import Timeline

ENVELOPE_SMOOTHING_S = 0.05  # Gaussian sigma: -3 dB near 2.7 Hz off the reference
SPECTRUM_HALF_SPAN_HZ = 120.0
DISPLAY_BINS = 1500
LIVE_FIT_MAX_SHOTS = 256  # the live FID fit uses at most the latest this many shots (memory)


@dataclass(frozen=True)
class Trace:
    """A signal against time from the FID's time zero, reduced for display."""

    time_s: np.ndarray
    signal_v: np.ndarray
    envelope_time_s: np.ndarray
    envelope_v: np.ndarray


@dataclass(frozen=True)
class Spectrum:
    frequency_hz: np.ndarray
    amplitude_v: np.ndarray
    mains_harmonics_hz: tuple[float, ...]
    larmor_hz: float


@dataclass(frozen=True)
class FitSummary:
    """The stack's fit: each value with its standard deviation."""

    shots: int
    frequency_hz: float
    frequency_sd_hz: float
    field_nt: float
    field_sd_nt: float
    t2star_s: float
    t2star_sd_s: float
    snr: float
    snr_sd: float


@dataclass(frozen=True)
class LiveViews:
    """Everything the live views show after one shot."""

    run_id: str
    shot_index: int
    at_s: float  # when the shot began, on the rig's clock
    shot: Trace
    shot_spectrum: Spectrum
    stack: Trace | None
    stack_spectrum: Spectrum | None
    shots_stacked: int
    fit: FitSummary | None
    fit_note: str
    kind: str = "fid"
    headline: dict | None = None  # {quantity, value, sd, unit, text} for kinds other than fid


# ---- pure functions ------------------------------------------------------------------------
def acquisition_window(record: ShotAcquired, channel: str = "signal") -> tuple[np.ndarray, float]:
    """(samples of the acquisition window, time of its first sample after time zero in s).

    Time zero is the end of the switch-off ramp or of the last pulse, dead_time_s before the
    acquisition starts (as recorded by the engine).
    """
    index = record.channel_names.index(channel) if channel in record.channel_names else 0
    start = record.acquire_start_sample
    window = np.asarray(record.samples[index, start:start + record.acquire_samples], dtype=float)
    return window, float(record.dead_time_s)


def minmax_reduce(time_s: np.ndarray, values: np.ndarray, bins: int = DISPLAY_BINS) -> tuple[np.ndarray, np.ndarray]:
    """Keep the min and the max of each of `bins` equal runs of samples (so no spike is lost)."""
    n = values.size
    if n <= 2 * bins:
        return time_s.copy(), values.copy()
    edges = np.linspace(0, n, bins + 1).astype(int)
    lo = np.minimum.reduceat(values, edges[:-1])
    hi = np.maximum.reduceat(values, edges[:-1])
    t = time_s[edges[:-1]]
    return np.repeat(t, 2), np.column_stack([lo, hi]).ravel()


def demodulated_envelope(signal_v: np.ndarray, sample_rate_hz: float, reference_hz: float,
                         smoothing_s: float = ENVELOPE_SMOOTHING_S) -> np.ndarray:
    """Envelope by quadrature demodulation: 2 |LPF{ y(t) exp(-i 2 pi f_ref t) }|.

    For y = A exp(-t/T) cos(2 pi f t + phi) with f near f_ref, the product is
    (A/2) exp(-t/T) [exp(i(2 pi (f - f_ref) t + phi)) + (a term at f + f_ref)]; the low-pass
    keeps the first term, whose modulus times 2 is A exp(-t/T) (quadrature detection, e.g.
    Lyons, Understanding Digital Signal Processing, 3rd ed., ch. 8, from memory).

    The low-pass is a Gaussian-weighted local mean (sigma = smoothing_s, normalised by the
    weights inside the record, so the ends neither ring nor sag to zero); its response is
    |H(f)| = exp(-(2 pi f sigma)^2 / 2) (the Fourier transform of a Gaussian).
    """
    y = np.asarray(signal_v, dtype=float)
    t = np.arange(y.size) / sample_rate_hz
    baseband = y * np.exp(-2j * np.pi * reference_hz * t)
    sigma_n = max(1.0, smoothing_s * sample_rate_hz)
    half = min(y.size - 1, int(4 * sigma_n))
    if half < 1:
        return 2.0 * np.abs(baseband)
    kernel = np.exp(-0.5 * (np.arange(-half, half + 1) / sigma_n) ** 2)
    weights = fftconvolve(np.ones(y.size), kernel, mode="same")
    return 2.0 * np.abs(fftconvolve(baseband, kernel, mode="same") / weights)


def amplitude_spectrum(signal_v: np.ndarray, sample_rate_hz: float, pad: int = 4) -> tuple[np.ndarray, np.ndarray]:
    """(frequency_hz, amplitude_v): Hann-windowed |FFT| scaled by 2 / sum(w).

    A sinusoid of amplitude A centred on a bin reads A (the Hann window's coherent gain
    sum(w)/N = 0.5).  Source: F. J. Harris, Proc. IEEE 66:51 (1978), table 1.
    """
    y = np.asarray(signal_v, dtype=float)
    w = np.hanning(y.size)
    spec = np.abs(np.fft.rfft((y - y.mean()) * w, y.size * pad)) * 2.0 / w.sum()
    return np.fft.rfftfreq(y.size * pad, 1.0 / sample_rate_hz), spec


def mains_harmonics_hz(low_hz: float, high_hz: float, mains_hz: float) -> tuple[float, ...]:
    """Multiples n * mains_hz (n >= 1) inside [low_hz, high_hz]."""
    first = max(1, math.ceil(low_hz / mains_hz))
    last = math.floor(high_hz / mains_hz)
    return tuple(n * mains_hz for n in range(first, last + 1))


def spectrum_near(signal_v: np.ndarray, sample_rate_hz: float, centre_hz: float, mains_hz: float,
                  half_span_hz: float = SPECTRUM_HALF_SPAN_HZ) -> Spectrum:
    """The amplitude spectrum within centre_hz +/- half_span_hz, with the mains harmonics there."""
    freqs, amps = amplitude_spectrum(signal_v, sample_rate_hz)
    lo, hi = centre_hz - half_span_hz, centre_hz + half_span_hz
    inside = (freqs >= lo) & (freqs <= hi)
    return Spectrum(frequency_hz=freqs[inside], amplitude_v=amps[inside],
                    mains_harmonics_hz=mains_harmonics_hz(lo, hi, mains_hz), larmor_hz=centre_hz)


def trace_of(window_v: np.ndarray, sample_rate_hz: float, offset_s: float, reference_hz: float) -> Trace:
    """A display trace of an acquisition window and its envelope, times from time zero."""
    t = offset_s + np.arange(window_v.size) / sample_rate_hz
    envelope = demodulated_envelope(window_v, sample_rate_hz, reference_hz)
    t_sig, sig = minmax_reduce(t, window_v)
    step = max(1, envelope.size // DISPLAY_BINS)
    return Trace(time_s=t_sig, signal_v=sig, envelope_time_s=t[::step].copy(), envelope_v=envelope[::step].copy())


def summary_of(result: AnalysisResult, shots: int) -> FitSummary:
    """The fit panel's numbers from a pipeline result; ValueError when no FID was detected.

    B and T2* with their sd come from the pipeline (controller.analysis.result).  The SNR's sd:
    (sd SNR / SNR)^2 = (sd A / A)^2 + 1 / (2 nu), the second term the relative standard error
    of a noise sd estimated from nu degrees of freedom (Gaussian noise; J. R. Taylor, An
    Introduction to Error Analysis, 2nd ed., 1997, from memory).  The pipeline estimates the
    noise from the residual in its fit window: per shot 2 m real values, m = 2 w T bins (w the
    window's half width, T the record length), less 4 fitted coefficients; nu = S (2 m - 4).
    """
    if not result.detected:
        raise ValueError(result.detection_reason or "no FID detected")
    bins = max(1.0, 2.0 * result.fit_half_width_hz * result.samples_used / result.sample_rate_hz)
    dof = max(1.0, max(1, result.shots) * (2.0 * bins - 4.0))
    rel_a = result.amplitude_sd / result.amplitude if result.amplitude > 0 else math.inf
    snr_sd = result.snr * math.sqrt(rel_a**2 + 1.0 / (2.0 * dof))
    return FitSummary(shots=shots, frequency_hz=result.frequency_hz, frequency_sd_hz=result.frequency_sd_hz,
                      field_nt=result.field_nt, field_sd_nt=result.field_sd_nt, t2star_s=result.t2star_s,
                      t2star_sd_s=result.t2star_sd_s, snr=result.snr, snr_sd=snr_sd)


def fit_window(window_v: np.ndarray, sample_rate_hz: float, offset_s: float, shots: int,
               band_hz: tuple[float, float]) -> FitSummary:
    """One (stacked) acquisition window through the FID pipeline (analysis.fid_entry.fit_fid)."""
    return summary_of(fit_fid(window_v, sample_rate_hz, offset_s, band_hz), shots)


def peak_hz(window_v: np.ndarray, sample_rate_hz: float, band_hz: tuple[float, float]) -> float:
    """Frequency of the largest amplitude-spectrum bin inside band_hz."""
    freqs, amps = amplitude_spectrum(window_v, sample_rate_hz)
    inside = (freqs >= band_hz[0]) & (freqs <= band_hz[1])
    if not inside.any():
        raise ValueError(f"band {band_hz} Hz holds no frequency bin")
    return float(freqs[inside][np.argmax(amps[inside])])


def fit_from_result(result: dict) -> FitSummary | None:
    """A FitSummary from an analysis result dict (a ShotAnalysed record); None if keys lack."""
    try:
        snr = float(result["snr"])
        return FitSummary(shots=int(result.get("shots", 0)), frequency_hz=float(result["frequency_hz"]),
                          frequency_sd_hz=float(result["frequency_sd_hz"]), field_nt=float(result["field_nt"]),
                          field_sd_nt=float(result["field_sd_nt"]), t2star_s=float(result["t2star_s"]),
                          t2star_sd_s=float(result["t2star_sd_s"]), snr=snr,
                          snr_sd=float(result.get("snr_sd", math.nan)))
    except (KeyError, TypeError, ValueError):
        return None


# ---- the running stack ---------------------------------------------------------------------
class LiveStack:
    """Running mean of a run's acquisition windows, and the views after each shot.

    Each window is turned back by its shot's receiver phase (phase cycling) before it is
    stacked, as the run's analysis does.  Shots marked bad, or whose window length differs
    from the first, are left out of the stack (they are still shown as the latest shot).
    The fit panel shows, for a FID run, the FID pipeline's joint fit of the shots so far (at
    most the latest LIVE_FIT_MAX_SHOTS), the same analysis as the stored run's; for any other kind
    it shows the headline of that kind's analysis of the shots so far
    (controller.analysis.by_kind), which may need several shots before it can fit.
    """

    def __init__(self, mains_hz: float = 50.0, larmor_guess_hz: float | None = None,
                 band_hz: tuple[float, float] = DEFAULT_BAND_HZ, context: AnalysisContext | None = None) -> None:
        self.mains_hz = mains_hz
        self.larmor_guess_hz = larmor_guess_hz
        self.band_hz = band_hz
        if larmor_guess_hz is not None:
            self.band_hz = (max(band_hz[0], larmor_guess_hz - 300.0), min(band_hz[1], larmor_guess_hz + 300.0))
        self.context = context or AnalysisContext(mains_hz=mains_hz)
        self.reset("")

    def reset(self, run_id: str, timeline: Timeline | None = None, spec: Any = None) -> None:
        self.run_id = run_id
        self.timeline, self.spec = timeline, spec
        self.plans = {p.index: p for p in timeline.shots} if timeline is not None else {}
        self.shots: list[ShotAcquired] = []  # kept for the analysis of kinds other than fid
        self.prepared: list[PreparedShot] = []  # fid: each shot through the pipeline's per-shot steps
        if timeline is not None and timeline.larmor_hz:
            self.band_hz = fid_band(timeline)
        self.sum_v: np.ndarray | None = None
        self.count = 0
        self.offset_s = 0.0
        self.fit: FitSummary | None = None

    @property
    def kind(self) -> str:
        return self.timeline.sequence_kind if self.timeline is not None else "fid"

    def _reference_hz(self, window_v: np.ndarray, sample_rate_hz: float) -> float:
        if self.fit is not None and self.band_hz[0] <= self.fit.frequency_hz <= self.band_hz[1]:
            return self.fit.frequency_hz
        try:
            return peak_hz(window_v, sample_rate_hz, self.band_hz)
        except ValueError:
            return self.larmor_guess_hz or 0.5 * sum(self.band_hz)

    def add(self, record: ShotAcquired, views: bool = True) -> LiveViews | None:
        """Take one shot into the stack and (unless views is False) compute every view."""
        if record.run_id != self.run_id:
            self.reset(record.run_id)
        fs = record.sample_rate_hz
        window, offset_s = acquisition_window(record)
        plan = self.plans.get(record.shot_index)
        if plan is not None:
            window = rotate_receiver_phase(window, receiver_phase_rad(plan))
        if not record.bad and (self.sum_v is None or self.sum_v.size == window.size):
            self.sum_v = window.copy() if self.sum_v is None else self.sum_v + window
            self.count += 1
            self.offset_s = offset_s
        if self.kind != "fid":
            self.shots.append(record)
        elif not record.bad:
            self._prepare(record, plan)
        if not views:
            return None
        note, headline = self._fit()
        reference = self._reference_hz(window, fs)
        stack = stack_spectrum = None
        if self.sum_v is not None:
            mean = self.sum_v / self.count
            stack = trace_of(mean, fs, self.offset_s, reference)
            stack_spectrum = spectrum_near(mean, fs, reference, self.mains_hz)
        return LiveViews(run_id=record.run_id, shot_index=record.shot_index, at_s=record.started_at_s,
                         shot=trace_of(window, fs, offset_s, reference),
                         shot_spectrum=spectrum_near(window, fs, reference, self.mains_hz), stack=stack,
                         stack_spectrum=stack_spectrum, shots_stacked=self.count, fit=self.fit, fit_note=note,
                         kind=self.kind, headline=headline)

    def _prepare(self, record: ShotAcquired, plan: Any) -> None:
        """The pipeline's per-shot steps, once per shot (as `precess run` does for its progress lines)."""
        full_scale = self.context.full_scale_v
        shot = fid_shot(plan, record, full_scale) if plan is not None else shot_from_record(record, full_scale)
        try:
            self.prepared.append(prepare_shot(shot, fid_options(record.channel_names, self.band_hz)))
        except (PrecessError, ValueError, ArithmeticError):
            return  # a shot the pipeline cannot use; the run's analysis will say so
        self.prepared_channels = record.channel_names
        del self.prepared[:-LIVE_FIT_MAX_SHOTS]

    def _fit(self) -> tuple[str, dict | None]:
        """(note, headline): the FID fit of the shots so far, or the kind's headline."""
        try:
            if self.kind != "fid":
                result = analyse_run(self.timeline, self.spec, self.shots, self.context)
                return "", result.get("headline")
            if self.prepared:
                options = fid_options(self.prepared_channels, self.band_hz)
                self.fit = summary_of(analyse_prepared(self.prepared, options), len(self.prepared))
        except (PrecessError, ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            self.fit = None
            return f"no fit yet: {exc}", None
        return "", None
