"""Monte-Carlo accuracy of `analyse_shots` against the Cramer-Rao bound of the full model.

For each noise kind, SNR and T2*, many synthetic records (controller.analysis.synthetic) are
analysed; printed are sd(estimate) / CRB for frequency and T2*, the bias in units of the
CRB, and the same frequency figures for a plain FFT-peak estimator on the same records.
The CRB comes from the Fisher information of the full model (controller.analysis.crb):
the FID plus the mains comb with its fundamental, or plus the ringing transient's four
parameters; for the reference kind, the FID in the noise an ideal canceller leaves,
sigma^2 + g^2 sigma_ref^2.  SNR = A(t_start) / sigma.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from controller.analysis import crb
from controller.analysis.pipeline import AnalysisOptions, ShotData, analyse_shots
from controller.analysis.spectrum import fft_peak_frequency_hz
from controller.analysis.synthetic import SyntheticSpec, make_record

KINDS = ("white", "mains", "ringing", "reference")
TARGETS = {"white": 1.15, "mains": 1.5, "ringing": 1.5, "reference": 1.5}


def spec_for(kind: str, snr: float, t2star_s: float) -> SyntheticSpec:
    base = SyntheticSpec(t2star_s=t2star_s, frequency_hz=2051.6, duration_s=1.0)
    if kind == "mains":
        base = replace(base, mains_hz=50.003, mains_amplitude=40.0)  # harmonic 41 at 2050.12 Hz, 1.48 Hz away
    elif kind == "ringing":
        base = replace(base, start_s=0.002, ringing_amplitude=300.0)
    elif kind == "reference":
        base = replace(base, interference_sd=10.0)
    amplitude = snr * base.noise_sd * math.exp(base.start_s / t2star_s)
    return replace(base, amplitude=amplitude)


def nuisance_columns(kind: str, spec: SyntheticSpec, t: np.ndarray) -> np.ndarray | None:
    if kind == "mains":
        m = np.arange(1, spec.mains_harmonics + 1)
        amps = np.where(m % 2 == 1, spec.mains_amplitude / m, spec.mains_amplitude / (3.0 * m)).astype(complex)
        return crb.mains_jacobian(t, spec.mains_hz, m, amps)
    if kind == "ringing":
        a, tau, f = spec.ringing_amplitude, spec.ringing_decay_s, spec.ringing_frequency_hz
        e = np.exp(-t / tau)
        s, c = np.sin(2 * np.pi * f * t), np.cos(2 * np.pi * f * t)
        return np.stack([e * s, e * c, a * t / tau**2 * e * s, a * e * c * 2 * np.pi * t], axis=1)
    return None


def bound(kind: str, spec: SyntheticSpec) -> dict[str, float]:
    t = spec.times_s()
    sigma = spec.noise_sd
    if kind == "reference":
        sigma = math.hypot(spec.noise_sd, spec.reference_gain * spec.reference_noise_sd)
    return crb.full_model_crb_sd(t, spec.frequency_hz, 1.0 / spec.t2star_s, spec.amplitude, spec.phase_rad, sigma,
                                 nuisance_columns(kind, spec, t))


def run_case(kind: str, snr: float, t2star_s: float, trials: int, seed: int = 0) -> dict[str, float]:
    spec = spec_for(kind, snr, t2star_s)
    options = AnalysisOptions(reference_channels=(1,) if kind == "reference" else ())
    est_f, est_t2, fft_f, missed = [], [], [], 0
    for i in range(trials):
        samples = make_record(spec, seed * 100003 + i)
        shot = ShotData(samples, spec.sample_rate_hz, ("signal", "reference"),
                        time_zero_sample=-int(round(spec.start_s * spec.sample_rate_hz)))
        result = analyse_shots([shot], options)
        fft_f.append(fft_peak_frequency_hz(samples[0], spec.sample_rate_hz, options.band_hz))
        if not result.detected:
            missed += 1
            continue
        est_f.append(result.frequency_hz)
        est_t2.append(result.t2star_s)
    b = bound(kind, spec)
    f_true = spec.frequency_hz
    out = {"kind": kind, "snr": snr, "t2star_s": t2star_s, "trials": trials, "missed": missed,
           "crb_f_hz": b["frequency_sd_hz"], "crb_t2_s": b["t2star_sd_s"]}
    if len(est_f) > 2:
        out.update(ratio_f=np.std(est_f, ddof=1) / b["frequency_sd_hz"],
                   bias_f=(np.mean(est_f) - f_true) / b["frequency_sd_hz"],
                   ratio_t2=np.std(est_t2, ddof=1) / b["t2star_sd_s"],
                   bias_t2=(np.mean(est_t2) - t2star_s) / b["t2star_sd_s"])
    out.update(fft_ratio_f=np.std(fft_f, ddof=1) / b["frequency_sd_hz"],
               fft_bias_f=(np.mean(fft_f) - f_true) / b["frequency_sd_hz"])
    return out


def false_alarm_rate(trials: int, seed: int = 7) -> float:
    """Fraction of noise-only records (white noise and mains hum) reported as detected."""
    spec = replace(spec_for("mains", 1.0, 0.5), amplitude=0.0)
    hits = 0
    for i in range(trials):
        samples = make_record(spec, seed * 7919 + i)
        hits += analyse_shots([ShotData(samples, spec.sample_rate_hz, ("signal", "reference"))]).detected
    return hits / trials
