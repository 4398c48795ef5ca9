"""Fit of a damped sinusoid to an FID.

Model (t from the FID's time zero, i.e. the end of the switch-off or pulse):

    s(t) = A exp(-t / T2*) cos(2 pi f t + phi)

written as s = exp(-r t) [a cos(2 pi f t) + b sin(2 pi f t)] with A = hypot(a, b),
phi = atan2(-b, a), r = 1/T2*.  Start values come from the zero-padded spectrum peak in the
band; a Gauss-Newton / Levenberg-Marquardt least-squares fit (scipy.optimize.least_squares)
refines all four.  Uncertainties are the square roots of the diagonal of
sigma^2 (J^T J)^-1, sigma^2 the residual variance (white-noise assumption).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares


@dataclass(frozen=True)
class DampedSineFit:
    frequency_hz: float
    frequency_sd_hz: float
    t2star_s: float
    t2star_sd_s: float
    amplitude: float
    amplitude_sd: float
    phase_rad: float
    noise_rms: float
    snr: float

    def as_dict(self) -> dict[str, float]:
        return {k: float(v) for k, v in self.__dict__.items()}


def spectrum_peak_hz(signal: np.ndarray, sample_rate_hz: float, band_hz: tuple[float, float], pad: int = 4) -> float:
    """Frequency of the largest |FFT| bin (Hann window, zero-padded pad x) inside band_hz."""
    n = signal.size
    spec = np.abs(np.fft.rfft((signal - signal.mean()) * np.hanning(n), n * pad))
    freqs = np.fft.rfftfreq(n * pad, 1.0 / sample_rate_hz)
    inside = (freqs >= band_hz[0]) & (freqs <= band_hz[1])
    if not inside.any():
        raise ValueError(f"band {band_hz} Hz holds no frequency bin")
    return float(freqs[inside][np.argmax(spec[inside])])


def _model_and_jacobian(p: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    f, r, a, b = p
    w = 2 * np.pi * f
    e = np.exp(-r * t)
    c, s = np.cos(w * t), np.sin(w * t)
    model = e * (a * c + b * s)
    jac = np.empty((t.size, 4))
    jac[:, 0] = e * (-a * s + b * c) * 2 * np.pi * t
    jac[:, 1] = -t * model
    jac[:, 2] = e * c
    jac[:, 3] = e * s
    return model, jac


def fit_damped_sine(
    signal: np.ndarray, sample_rate_hz: float, time_zero_offset_s: float, band_hz: tuple[float, float],
    frequency_guess_hz: float | None = None, t2star_guess_s: float | None = None,
) -> DampedSineFit:
    """Fit A exp(-t/T2*) cos(2 pi f t + phi) to signal whose first sample lies time_zero_offset_s after time zero."""
    y = np.asarray(signal, dtype=float)
    y = y - y.mean()
    t = time_zero_offset_s + np.arange(y.size) / sample_rate_hz
    f0 = frequency_guess_hz if frequency_guess_hz is not None else spectrum_peak_hz(y, sample_rate_hz, band_hz)
    r0 = 1.0 / (t2star_guess_s if t2star_guess_s else max(t[-1] / 3.0, 1e-3))
    # linear start for (a, b) at the guessed f, r
    e = np.exp(-r0 * t)
    basis = np.stack([e * np.cos(2 * np.pi * f0 * t), e * np.sin(2 * np.pi * f0 * t)], axis=1)
    (a0, b0), *_ = np.linalg.lstsq(basis, y, rcond=None)
    p0 = np.array([f0, r0, a0, b0])
    res = least_squares(lambda p: _model_and_jacobian(p, t)[0] - y, p0,
                        jac=lambda p: _model_and_jacobian(p, t)[1], method="lm", x_scale="jac")
    f, r, a, b = res.x
    model, jac = _model_and_jacobian(res.x, t)
    resid = y - model
    dof = max(1, y.size - 4)
    sigma2 = float(resid @ resid) / dof
    try:
        cov = np.linalg.inv(jac.T @ jac) * sigma2
    except np.linalg.LinAlgError:
        cov = np.full((4, 4), np.nan)
    amplitude = math.hypot(a, b)
    # var(A) by the delta method from (a, b)
    grad = np.array([a, b]) / amplitude if amplitude > 0 else np.zeros(2)
    amp_sd = math.sqrt(max(0.0, float(grad @ cov[2:, 2:] @ grad)))
    r_sd = math.sqrt(max(0.0, cov[1, 1]))
    t2 = 1.0 / r if r > 0 else math.inf
    noise = math.sqrt(sigma2)
    return DampedSineFit(
        frequency_hz=float(f), frequency_sd_hz=math.sqrt(max(0.0, cov[0, 0])),
        t2star_s=t2, t2star_sd_s=r_sd / r**2 if r > 0 else math.inf,
        amplitude=amplitude, amplitude_sd=amp_sd, phase_rad=math.atan2(-b, a),
        noise_rms=noise, snr=amplitude / noise if noise > 0 else math.inf)
