"""Exact DFT of a sampled, truncated (damped) sinusoid: the building block of every spectral fit.

A real record x_n = Re(c z^n), n = 0 .. N-1, with z = exp((-r + i 2 pi f) / fs), has the DFT

    X_k = sum_n x_n exp(-i 2 pi k n / N) = (c S(u_k) + conj(c) S(v_k)) / 2,
    S(u) = sum_{n<N} exp(u n) = (e^{N u} - 1) / (e^u - 1),
    u_k = (-r + i 2 pi (f - k fs / N)) / fs,   v_k = (-r - i 2 pi (f + k fs / N)) / fs

(geometric series; the second term is the negative-frequency image).  The formula holds for
every bin, so a fit on a few bins around a line models leakage and the abrupt start and end
of the record exactly, and white noise stays white and independent from bin to bin
(real and imaginary parts each of variance N sigma^2 / 2 for 0 < k < N/2).  A constant
sinusoid (a mains harmonic) is the case r = 0.

Public functions: `line_sums`, `line_columns`, `line_columns_with_derivatives`,
`bin_frequencies_hz`.
"""

from __future__ import annotations

import numpy as np

_SMALL_NU = 1e-3


def line_sums(log_z: np.ndarray, bins: np.ndarray, n_samples: int,
              derivative: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
    """S(u) = sum_{n=0}^{N-1} e^{u n} and dS/du on u_lk = log_z_l - i 2 pi k / N (lines l, bins k).

    Since e^{N u_lk} = z_l^N for integer k, S = (z^N - 1) / (z w_k - 1) with w_k = e^{-i 2 pi k/N}
    and dS/du = (N z^N (z w_k - 1) - (z^N - 1) z w_k) / (z w_k - 1)^2: one product and one
    division per element (derivative=False skips dS/du and returns None for it).  Where
    |N u| < 1e-3 the Taylor series S = N (1 + (N-1) u / 2 + (N-1)(2N-1) u^2 / 12),
    dS/du = N (N-1)/2 + N (N-1)(2N-1) u / 6 replaces the 0/0.  bins is 1-D (shared by all
    lines) or 2-D (one row of bins per line); the result has shape (lines, bins per line).
    """
    log_z = np.atleast_1d(np.asarray(log_z, dtype=complex))
    k = np.asarray(bins)
    k2 = k[None, :] if k.ndim == 1 else k
    n = float(n_samples)
    z_n1 = np.expm1(n * log_z)[:, None]
    zw = np.exp(log_z)[:, None] * np.exp(-2j * np.pi * k2 / n)
    d = zw - 1.0
    small = np.abs(d) < _SMALL_NU / n
    any_small = bool(small.any())
    if any_small:
        d[small] = 1.0
    inv = d.conj()
    inv /= d.real * d.real + d.imag * d.imag
    s = z_n1 * inv
    ds = None
    if derivative:
        ds = n * (z_n1 + 1.0) - s * zw
        ds *= inv
    if any_small:
        phase = np.broadcast_to(log_z[:, None], small.shape)[small] - 2j * np.pi * np.broadcast_to(k2, small.shape)[small] / n
        u = phase - 2j * np.pi * np.round(phase.imag / (2 * np.pi))
        s[small] = n * (1.0 + (n - 1.0) * u / 2.0 + (n - 1.0) * (2.0 * n - 1.0) * u**2 / 12.0)
        if ds is not None:
            ds[small] = n * (n - 1.0) / 2.0 + n * (n - 1.0) * (2.0 * n - 1.0) * u / 6.0
    return s, ds


def bin_frequencies_hz(bins: np.ndarray, n_samples: int, sample_rate_hz: float) -> np.ndarray:
    """Frequency of DFT bin k: f_k = k fs / N."""
    return np.asarray(bins, dtype=float) * sample_rate_hz / n_samples


def _sums(bins: np.ndarray, n_samples: int, sample_rate_hz: float, frequency_hz: float | np.ndarray,
          rate_per_s: float | np.ndarray, derivative: bool = True) -> tuple[np.ndarray, ...]:
    f = np.atleast_1d(np.asarray(frequency_hz, dtype=float))
    r = np.broadcast_to(np.asarray(rate_per_s, dtype=float), f.shape)
    su, dsu = line_sums((-r + 2j * np.pi * f) / sample_rate_hz, bins, n_samples, derivative)
    sv, dsv = line_sums((-r - 2j * np.pi * f) / sample_rate_hz, bins, n_samples, derivative)
    return su, dsu, sv, dsv


def line_columns(bins: np.ndarray, n_samples: int, sample_rate_hz: float, frequency_hz: float | np.ndarray,
                 rate_per_s: float | np.ndarray = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """DFT columns (P_k, Q_k) of the real line x_n = e^{-r n/fs} (a cos(2 pi f n/fs) + b sin(2 pi f n/fs)).

    With c = a - i b the DFT is X_k = a P_k + b Q_k, where P = (S(u) + S(v)) / 2 and
    Q = i (S(v) - S(u)) / 2 (module docstring).  frequency_hz and rate_per_s may be arrays
    of L lines; the result then has shape (L, len(bins)).
    """
    su, _, sv, _ = _sums(bins, n_samples, sample_rate_hz, frequency_hz, rate_per_s, derivative=False)
    p = 0.5 * (su + sv)
    q = 0.5j * (sv - su)
    if np.ndim(frequency_hz) == 0 and np.ndim(rate_per_s) == 0:
        return p[0], q[0]
    return p, q


def line_columns_with_derivatives(bins: np.ndarray, n_samples: int, sample_rate_hz: float, frequency_hz: float,
                                  rate_per_s: float) -> tuple[np.ndarray, ...]:
    """(P, Q, dP/df, dQ/df, dP/dr, dQ/dr) for one line; see `line_columns`.

    du/df = i 2 pi / fs, dv/df = -i 2 pi / fs, du/dr = dv/dr = -1 / fs.
    """
    su, dsu, sv, dsv = (a[0] for a in _sums(bins, n_samples, sample_rate_hz, frequency_hz, rate_per_s))
    w = 2.0 * np.pi / sample_rate_hz
    p, q = 0.5 * (su + sv), 0.5j * (sv - su)
    dsu_f, dsv_f = 1j * w * dsu, -1j * w * dsv
    dsu_r, dsv_r = -dsu / sample_rate_hz, -dsv / sample_rate_hz
    return (p, q, 0.5 * (dsu_f + dsv_f), 0.5j * (dsv_f - dsu_f), 0.5 * (dsu_r + dsv_r), 0.5j * (dsv_r - dsu_r))
