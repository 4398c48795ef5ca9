"""Cramer-Rao bounds for the FID's parameters: the floor any unbiased estimator stands on.

For data y_n = s(t_n; theta) + w_n, w white Gaussian of variance sigma^2, the Fisher
information is F = J^T J / sigma^2 with J_ni = ds(t_n)/dtheta_i, and cov(theta_hat) >= F^-1
(Cramer 1946; Rao 1945; Kay, Fundamentals of Statistical Signal Processing I, 1993, ch. 3).
The full model here is the damped sinusoid

    s(t) = exp(-r t) (a cos 2 pi f t + b sin 2 pi f t)        (theta = f, r, a, b)

plus, as nuisance parameters that raise the bound, the mains comb
sum_m (a_m cos 2 pi m f0 t + b_m sin 2 pi m f0 t) with f0 unknown, and any further columns
the caller appends (e.g. a ringing transient).

The closed forms for the FID alone (Rife & Boorstyn 1974 undamped; the damped S_k form of
REFERENCE.md) live in controller.physics.precision; the tests check this numerical Fisher
information against them.
"""

from __future__ import annotations

import math

import numpy as np


def sample_times_s(n_samples: int, sample_rate_hz: float, start_s: float = 0.0) -> np.ndarray:
    """t_n = start_s + n / fs."""
    return start_s + np.arange(n_samples) / sample_rate_hz


def damped_sine_jacobian(times_s: np.ndarray, frequency_hz: float, rate_per_s: float, amplitude: float,
                         phase_rad: float) -> np.ndarray:
    """Columns ds/df, ds/dr, ds/da, ds/db of s = e^{-r t}(a cos wt + b sin wt), a = A cos phi, b = -A sin phi."""
    t = np.asarray(times_s, dtype=float)
    a, b = amplitude * math.cos(phase_rad), -amplitude * math.sin(phase_rad)
    w = 2 * math.pi * frequency_hz
    e = np.exp(-rate_per_s * t)
    c, s = np.cos(w * t), np.sin(w * t)
    model = e * (a * c + b * s)
    return np.stack([2 * math.pi * t * e * (-a * s + b * c), -t * model, e * c, e * s], axis=1)


def undamped_sine_jacobian(times_s: np.ndarray, frequency_hz: float, amplitude: float, phase_rad: float) -> np.ndarray:
    """Columns ds/df, ds/da, ds/db of s = a cos wt + b sin wt (no damping parameter)."""
    jac = damped_sine_jacobian(times_s, frequency_hz, 0.0, amplitude, phase_rad)
    return jac[:, [0, 2, 3]]


def mains_jacobian(times_s: np.ndarray, fundamental_hz: float, harmonics: np.ndarray,
                   amplitudes: np.ndarray) -> np.ndarray:
    """Columns for the comb: d/df0 (one column), then d/da_m, d/db_m for every harmonic m.

    amplitudes are complex c_m = a_m - i b_m (as in controller.analysis.mains).
    """
    t = np.asarray(times_s, dtype=float)
    cols = [np.zeros(t.size)]
    for m, c in zip(np.asarray(harmonics), np.asarray(amplitudes)):
        w = 2 * math.pi * m * fundamental_hz
        cw, sw = np.cos(w * t), np.sin(w * t)
        a, b = c.real, -c.imag
        cols[0] = cols[0] + 2 * math.pi * m * t * (-a * sw + b * cw)
        cols += [cw, sw]
    return np.stack(cols, axis=1)


def crb_covariance(jacobian: np.ndarray, noise_sd: float) -> np.ndarray:
    """F^-1 = sigma^2 (J^T J)^-1."""
    jac = np.asarray(jacobian, dtype=float)
    return noise_sd**2 * np.linalg.inv(jac.T @ jac)


def frequency_crb_sd_hz(times_s: np.ndarray, frequency_hz: float, rate_per_s: float, amplitude: float,
                        phase_rad: float, noise_sd: float, nuisance: np.ndarray | None = None) -> float:
    """sqrt of the (f, f) element of the bound for the damped sinusoid plus nuisance columns."""
    jac = damped_sine_jacobian(times_s, frequency_hz, rate_per_s, amplitude, phase_rad)
    if nuisance is not None and nuisance.size:
        jac = np.concatenate([jac, nuisance], axis=1)
    return math.sqrt(crb_covariance(jac, noise_sd)[0, 0])


def full_model_crb_sd(times_s: np.ndarray, frequency_hz: float, rate_per_s: float, amplitude: float,
                      phase_rad: float, noise_sd: float, nuisance: np.ndarray | None = None) -> dict[str, float]:
    """Bounds on sd(f) in Hz, sd(r) in 1/s and sd(T2*) in s (delta method, sd(T2*) = sd(r) / r^2)."""
    jac = damped_sine_jacobian(times_s, frequency_hz, rate_per_s, amplitude, phase_rad)
    if nuisance is not None and nuisance.size:
        jac = np.concatenate([jac, nuisance], axis=1)
    cov = crb_covariance(jac, noise_sd)
    rate_sd = math.sqrt(cov[1, 1])
    return {"frequency_sd_hz": math.sqrt(cov[0, 0]), "rate_sd_per_s": rate_sd,
            "t2star_sd_s": rate_sd / rate_per_s**2 if rate_per_s > 0 else math.inf}
