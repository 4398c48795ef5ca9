"""Despiking: find impulsive noise where a linear predictor fails, and fill it by prediction.

The FID and the mains harmonics are narrow-band, hence predictable from the past; a spike
is not.  Following the idea of Costabel & Mueller-Petke, Near Surface Geophysics 12:185
(2014) (detect spikes in a signal whose coherent parts are removed, replace the affected
samples), the detector here whitens the record with a linear predictor:

1. an autoregressive model of order p, x_n = sum_{j=1}^p a_j x_{n-j} + e_n, from the
   autocorrelation (Yule-Walker, solved by Levinson recursion: scipy.linalg.solve_toeplitz);
2. the prediction error e_n; its robust scale s = 1.4826 MAD(e) (Gaussian consistency);
3. samples with |e_n| > z s are flagged, z = Phi^{-1}(1 - P_fa / (2 N)) so that a clean
   record of N Gaussian samples raises a false alarm with probability P_fa = 1e-3
   (Bonferroni);
4. each flagged sample taints the samples from one before it to SPIKE_SPAN_S after it;
   tainted stretches are refilled by forward and backward prediction with the same model,
   cross-faded linearly (for a real stationary process the backward predictor has the same
   coefficients).

A record with nothing flagged is returned unchanged (the same values, a new array).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_toeplitz
from scipy.signal import lfilter
from scipy.stats import norm

AR_ORDER = 24
FALSE_ALARM_PROBABILITY = 1e-3
SPIKE_SPAN_S = 0.0005
MAD_TO_SD = 1.4826
MAD_STRIDE = 4  # the robust scale from every 4th error sample is plenty


@dataclass(frozen=True)
class Despiked:
    """cleaned: the record with spikes refilled; spike_mask: True where samples were replaced."""

    cleaned: np.ndarray
    spike_mask: np.ndarray
    threshold: float

    @property
    def replaced_samples(self) -> int:
        return int(self.spike_mask.sum())


def predictor_coefficients(record: np.ndarray, order: int = AR_ORDER) -> np.ndarray:
    """Yule-Walker AR coefficients a_1..a_p from the biased autocorrelation R_j = (1/N) sum_n x_n x_{n+j}."""
    x = np.asarray(record, dtype=float) - np.mean(record)
    n = x.size
    acf = np.array([x[:n - j] @ x[j:] for j in range(order + 1)]) / n
    if acf[0] <= 0:
        return np.zeros(order)
    acf[0] *= 1.0 + 1e-9  # a whisker of white noise keeps the Toeplitz system regular
    return solve_toeplitz(acf[:order], acf[1:order + 1])


def detection_threshold(n_samples: int, false_alarm_probability: float = FALSE_ALARM_PROBABILITY) -> float:
    """z = Phi^{-1}(1 - P_fa / (2 N)) (two-sided, Bonferroni over N samples)."""
    return float(norm.isf(false_alarm_probability / (2.0 * max(1, n_samples))))


def _fill(x: np.ndarray, lo: int, hi: int, coeffs: np.ndarray) -> None:
    """Refill x[lo:hi] in place (x is a private copy) by cross-faded forward/backward prediction."""
    p = coeffs.size
    length = hi - lo
    forward = np.empty(length)
    history = list(x[max(0, lo - p):lo][::-1])
    history += [0.0] * (p - len(history))
    for i in range(length):
        value = float(np.dot(coeffs, history[:p]))
        forward[i] = value
        history.insert(0, value)
    backward = np.empty(length)
    future = list(x[hi:hi + p])
    future += [0.0] * (p - len(future))
    for i in range(length):
        value = float(np.dot(coeffs, future[:p]))
        backward[length - 1 - i] = value
        future.insert(0, value)
    weight = (np.arange(length) + 1.0) / (length + 1.0)
    if lo < p:
        weight[:] = 1.0
    if hi + p > x.size:
        weight[:] = 0.0
    x[lo:hi] = (1.0 - weight) * forward + weight * backward


def despike(record: np.ndarray, sample_rate_hz: float, order: int = AR_ORDER,
            false_alarm_probability: float = FALSE_ALARM_PROBABILITY) -> Despiked:
    """Steps 1-4 of the module docstring; the input is not modified."""
    x = np.array(record, dtype=float)
    n = x.size
    mask = np.zeros(n, dtype=bool)
    z = detection_threshold(n, false_alarm_probability)
    if n <= 4 * order:
        return Despiked(x, mask, z)
    coeffs = predictor_coefficients(x, order)
    error = lfilter(np.concatenate([[1.0], -coeffs]), [1.0], x - x.mean())[order:]
    sample = error[::MAD_STRIDE]
    scale = MAD_TO_SD * float(np.median(np.abs(sample - np.median(sample))))
    if scale <= 0:
        return Despiked(x, mask, z)
    flagged = np.flatnonzero(np.abs(error) > z * scale) + order
    if flagged.size == 0:
        return Despiked(x, mask, z)
    span = max(2, int(round(SPIKE_SPAN_S * sample_rate_hz)))
    for k in flagged:
        mask[max(0, k - 1):min(n, k + span)] = True
    edges = np.flatnonzero(np.diff(np.concatenate([[0], mask.view(np.int8), [0]])))
    mean = x.mean()
    centred = x - mean
    for lo, hi in zip(edges[::2], edges[1::2]):
        _fill(centred, int(lo), int(hi), coeffs)
    return Despiked(centred + mean, mask, z)
