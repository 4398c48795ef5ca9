"""Complex demodulation on the sample clock, receiver phase, impulse masks and phase projection.

Pulses are synthesised as A cos(2 pi f k / fs + phi) with k counted from the segment's first
sample.  Demodulating the received s(k) the same way,

    z(k) = 2 s(k) exp(-i 2 pi f k / fs),

turns a signal A cos(2 pi f k/fs + psi) into A exp(i psi) plus a term at 2f that averages out
over a window, so echo phases are measured in the transmitter's own frame, where a spin echo
refocuses every offset (Hahn 1950).  A receiver phase phi_r multiplies by exp(-i phi_r).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.signal import hilbert

MAD_TO_SIGMA = 1.4826  # sigma = 1.4826 MAD for Gaussian noise [pub: Rousseeuw & Croux, JASA 88:1273 (1993)]


def demodulate(signal: np.ndarray, sample_rate_hz: float, frequency_hz: float, first_sample: int = 0) -> np.ndarray:
    """z(k) = 2 s(k) exp(-i 2 pi f k / fs), k = first_sample + 0, 1, ... (the segment's sample index)."""
    k = first_sample + np.arange(np.asarray(signal).size)
    return 2.0 * np.asarray(signal, dtype=float) * np.exp(-2j * np.pi * frequency_hz * k / sample_rate_hz)


def impulse_mask(signal: np.ndarray, threshold_sigma: float = 8.0, guard_samples: int = 16) -> np.ndarray:
    """True where a sample is usable: |s - median| <= threshold * 1.4826 MAD, with guard_samples
    either side of every outlier also masked (an impulse rings for a few samples).

    A crude blanker for impulsive noise (common practice, no source); the signal itself stays
    well inside the threshold as long as it is below about threshold/sqrt(2) times the noise.
    """
    s = np.asarray(signal, dtype=float)
    if s.size == 0:
        return np.ones(0, dtype=bool)
    centre = np.median(s)
    sigma = MAD_TO_SIGMA * np.median(np.abs(s - centre))
    if sigma <= 0:
        return np.ones(s.size, dtype=bool)
    bad = np.abs(s - centre) > threshold_sigma * sigma
    if guard_samples > 0 and bad.any():
        bad = np.convolve(bad.astype(float), np.ones(2 * guard_samples + 1), mode="same") > 0
    return ~bad


def rotate_receiver_phase(signal: np.ndarray, receiver_phase_rad: float) -> np.ndarray:
    """Real signal with its phase turned back by phi_r: Re[(s + i H s) exp(-i phi_r)].

    Multiples of pi are exact sign changes; other phases use the analytic signal (Hilbert
    transform, Gabor 1946), whose error is confined to the window's ends.
    """
    s = np.asarray(signal, dtype=float)
    half_turns = receiver_phase_rad / math.pi
    if abs(half_turns - round(half_turns)) < 1e-12:
        return s.copy() if round(half_turns) % 2 == 0 else -s
    return np.real(hilbert(s) * np.exp(-1j * receiver_phase_rad))


def window_means(z: np.ndarray, usable: np.ndarray, centres: np.ndarray, half_width: int) -> tuple[np.ndarray, np.ndarray]:
    """Mean of z over [c - w, c + w] for each centre, using only usable samples; and the count used."""
    means = np.zeros(len(centres), dtype=complex)
    counts = np.zeros(len(centres), dtype=int)
    for i, c in enumerate(centres):
        lo, hi = max(0, c - half_width), min(z.size, c + half_width + 1)
        ok = usable[lo:hi]
        counts[i] = int(ok.sum())
        means[i] = z[lo:hi][ok].mean() if counts[i] else np.nan
    return means, counts


def principal_axis_projection(values: np.ndarray) -> tuple[np.ndarray, float]:
    """Signed amplitudes p_k = Re(v_k exp(-i theta)) along the axis theta = arg(sum v_k^2) / 2.

    The doubled angle makes the axis indifferent to sign changes (alternating CP echoes, a
    nutation curve passing 180 deg).  The sign is chosen so that sum p_k >= 0.
    """
    v = np.asarray(values, dtype=complex)
    finite = np.isfinite(v)
    theta = 0.5 * float(np.angle(np.sum(v[finite] ** 2))) if finite.any() else 0.0
    p = np.real(v * np.exp(-1j * theta))
    if np.nansum(p) < 0:
        p, theta = -p, theta + math.pi
    return p, theta
