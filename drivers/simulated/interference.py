"""Interference the simulated receive chain adds: mains hum, spikes, switch-off ringing, thermal noise.

All functions are pure given a numpy Generator; amplitudes are volts referred to the coil
(before the preamp) unless the name says ADC.
"""

from __future__ import annotations

import numpy as np


def mains_hum(
    times_s: np.ndarray, fundamental_hz: float, amplitude_v: float, harmonics: int, phases_rad: np.ndarray
) -> np.ndarray:
    """Sum over h = 1..H of A_h cos(2 pi h f t + phi_h), with A_h = A / h for odd h and A / (3 h) for even h.

    Odd harmonics dominate in real installations (rectifier loads) [practice, no source].
    Evaluated as Re(sum_h c_h z^h), z = exp(i 2 pi f t), c_h = A_h exp(i phi_h), by Horner's scheme.
    """
    if harmonics < 1 or amplitude_v == 0.0:
        return np.zeros_like(times_s)
    h = np.arange(1, harmonics + 1)
    coeffs = np.where(h % 2 == 1, amplitude_v / h, amplitude_v / (3.0 * h)) * np.exp(1j * phases_rad[:harmonics])
    z = np.exp(2j * np.pi * fundamental_hz * times_s)
    acc = np.full(times_s.shape, coeffs[-1], dtype=complex)
    for c in coeffs[-2::-1]:
        acc *= z
        acc += c
    return np.real(acc * z)


def spikes(n_samples: int, sample_rate_hz: float, rate_per_s: float, amplitude_v: float,
           rng: np.random.Generator) -> np.ndarray:
    """Impulsive noise: Poisson arrivals of short decaying bursts (about 0.2 ms), random sign and size."""
    out = np.zeros(n_samples)
    count = rng.poisson(rate_per_s * n_samples / sample_rate_hz)
    width = max(2, int(0.0002 * sample_rate_hz))
    kernel = np.exp(-np.arange(width) / (width / 3.0)) * np.cos(np.arange(width) * 1.3)
    for start in rng.integers(0, max(1, n_samples - width), size=count):
        out[start:start + width] += rng.choice([-1.0, 1.0]) * amplitude_v * rng.uniform(0.5, 2.0) * kernel
    return out


def ringing_adc_v(times_since_off_s: np.ndarray, amplitude_v: float, decay_s: float, frequency_hz: float) -> np.ndarray:
    """Switch-off ringing at the ADC: A exp(-t/tau) sin(2 pi f t) for t >= 0, zero before."""
    t = np.clip(times_since_off_s, 0.0, None)
    return np.where(times_since_off_s >= 0.0, amplitude_v * np.exp(-t / decay_s) * np.sin(2 * np.pi * frequency_hz * t), 0.0)


def white_noise_v(n_samples: int, density_v_per_rthz: float, sample_rate_hz: float, rng: np.random.Generator) -> np.ndarray:
    """White Gaussian noise of one-sided density e_n: sigma = e_n sqrt(fs / 2)."""
    return rng.normal(0.0, density_v_per_rthz * np.sqrt(sample_rate_hz / 2.0), n_samples)
