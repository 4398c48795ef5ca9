"""Stacking of shots with phase alignment, for display and export.

The estimate itself does not need a stacked trace: `controller.analysis.linefit` fits all
shots at once with one (f, T2*) and a complex amplitude per shot, which is the coherent
(maximum-likelihood) combination.  For a picture of the stack, each shot's trace is rotated
to a common phase and averaged:

    y(t) = (1/S) sum_s Re( x_s^a(t) exp(-i (phi_s - phi_ref)) ),

x_s^a the analytic signal of shot s (Hilbert transform, Gabor 1946), phi_s its FID phase
at time zero and phi_ref the phase of the amplitude-weighted resultant.  Shots recorded with
the same switch-off have the same phase and the rotation does nothing; shots whose phase
wanders (a pulse not locked to the converter clock) add up instead of cancelling.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.signal import hilbert


def common_window(starts_s: list[float], lengths: list[int], sample_rate_hz: float) -> tuple[float, int]:
    """(start in s after time zero, length in samples) covered by every shot."""
    start = max(starts_s)
    end = min(s + n / sample_rate_hz for s, n in zip(starts_s, lengths))
    return start, max(0, int(math.floor((end - start) * sample_rate_hz + 1e-9)))


def cut_to_window(trace: np.ndarray, trace_start_s: float, window_start_s: float, length: int,
                  sample_rate_hz: float) -> np.ndarray:
    """The samples of trace (first sample at trace_start_s) from window_start_s on, length of them."""
    offset = int(round((window_start_s - trace_start_s) * sample_rate_hz))
    return np.asarray(trace)[offset:offset + length]


def stack_aligned(traces: list[np.ndarray], phases_rad: list[float], amplitudes: list[float] | None = None) -> np.ndarray:
    """Phase-aligned mean of equally long real traces (module docstring)."""
    if not traces:
        raise ValueError("no shots to stack")
    lengths = {t.size for t in traces}
    if len(lengths) != 1:
        raise ValueError(f"shots differ in length: {sorted(lengths)}")
    weights = amplitudes if amplitudes is not None else [1.0] * len(traces)
    resultant = sum(w * complex(math.cos(p), math.sin(p)) for w, p in zip(weights, phases_rad))
    reference = math.atan2(resultant.imag, resultant.real)
    if len(traces) == 1:
        return np.array(traces[0], dtype=float)
    total = np.zeros(lengths.pop())
    for trace, phase in zip(traces, phases_rad):
        total += np.real(hilbert(np.asarray(trace, dtype=float)) * np.exp(-1j * (phase - reference)))
    return total / len(traces)
