"""How precisely one shot can fix the frequency, and how to spend the time between shots.

Cramer-Rao bound for a real damped sinusoid A exp(-t/T2*) cos(w t + phi) sampled at t_n in
white noise of variance sigma^2, all four parameters unknown [Cramer-Rao bound; undamped case
Rife & Boorstyn, IEEE Trans. IT-20:591 (1974); damped case Yao & Pandit, IEEE Trans. SP 43
(1995), from memory; REFERENCE.md "Estimation limits"]:

    var(w) >= (2 sigma^2 / A^2) S0 / (S0 S2 - S1^2),   S_k = sum t_n^k exp(-2 t_n / T2*)

evaluated here in the equivalent, cancellation-free form
var(w) >= 2 sigma^2 / (A^2 sum w_n (t_n - tbar)^2), w_n = exp(-2 t_n/T2*), tbar = S1/S0.
A one-sided noise density e_n sampled at f_s gives sigma^2 = e_n^2 f_s / 2.  This is the
white-noise floor: mains harmonics and other nuisance parameters raise it.

Stacking n independent shots divides the standard deviation by sqrt(n).

Polarising time: the amplitude grows as 1 - exp(-tp/T1); with t_o the rest of a shot, the SNR
reached per unit time goes as (1 - exp(-x)) / sqrt(x + c), x = tp/T1, c = t_o/T1, whose
maximum satisfies exp(x) = 1 + 2 (x + c); x = 1.2564 for c = 0 [calc; REFERENCE.md gives 1.26 T1].
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq

CHUNK_SAMPLES = 1 << 20


def _weighted_time_moments(n_samples: int, sample_interval_s: float, t2star_s: float) -> tuple[float, float]:
    """(S0, sum w (t - tbar)^2) for t_n = n dt, w_n = exp(-2 t_n / T2*), in chunks (two passes)."""
    rate = 0.0 if math.isinf(t2star_s) else 2.0 / t2star_s

    def chunks():
        for start in range(0, n_samples, CHUNK_SAMPLES):
            t = np.arange(start, min(n_samples, start + CHUNK_SAMPLES)) * sample_interval_s
            yield t, np.exp(-rate * t)

    s0 = s1 = 0.0
    for t, w in chunks():
        s0 += float(w.sum())
        s1 += float((w * t).sum())
    tbar = s1 / s0
    spread = sum(float((w * (t - tbar) ** 2).sum()) for t, w in chunks())
    return s0, spread


def frequency_crb_sd_hz(amplitude_v: float, noise_density_v_per_rthz: float, sample_rate_hz: float,
                        duration_s: float, t2star_s: float = math.inf) -> float:
    """Cramer-Rao standard deviation of the frequency (Hz) of one damped sinusoid record.

    amplitude_v is A at the first sample (t = 0); the record lasts duration_s at sample_rate_hz.
    """
    n = int(round(duration_s * sample_rate_hz))
    if n < 4:
        raise ValueError("a record needs at least 4 samples to fix four parameters")
    sigma2 = noise_density_v_per_rthz**2 * sample_rate_hz / 2.0
    _, spread = _weighted_time_moments(n, 1.0 / sample_rate_hz, t2star_s)
    var_w = 2.0 * sigma2 / (amplitude_v**2 * spread)
    return math.sqrt(var_w) / (2.0 * math.pi)


def undamped_frequency_crb_sd_hz(amplitude_v: float, sigma_v: float, sample_interval_s: float, n_samples: int) -> float:
    """Rife & Boorstyn (1974), real sinusoid: var(w) = 24 sigma^2 / (A^2 dt^2 N (N^2 - 1)); returns sd in Hz."""
    var_w = 24.0 * sigma_v**2 / (amplitude_v**2 * sample_interval_s**2 * n_samples * (n_samples**2 - 1))
    return math.sqrt(var_w) / (2.0 * math.pi)


def shots_for_precision(sd_per_shot: float, target_sd: float) -> int:
    """Shots to stack so that sd_per_shot / sqrt(n) <= target_sd."""
    return max(1, math.ceil((sd_per_shot / target_sd) ** 2 * (1 - 1e-12)))


def snr_rate(polarise_s: float, t1_s: float, other_s: float) -> float:
    """Relative SNR per square root of time, (1 - exp(-tp/T1)) / sqrt(tp + t_o)."""
    return -math.expm1(-polarise_s / t1_s) / math.sqrt(polarise_s + other_s)


def optimal_polarise_s(t1_s: float, other_s: float) -> float:
    """The tp that maximises snr_rate: root of exp(x) = 1 + 2 (x + t_o/T1), x = tp/T1."""
    c = other_s / t1_s
    x = brentq(lambda v: math.exp(v) - 1.0 - 2.0 * (v + c), 1e-9, 50.0 + 2 * math.log1p(c))
    return x * t1_s
