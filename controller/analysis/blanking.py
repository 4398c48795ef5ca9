"""Where a record becomes usable: overload and switch-off ringing at its start, and the blanking they need.

Two tests, run from the first sample the analysis may use:

1. Overload: samples at the converter's full scale (|x| >= 0.999 full scale) in the first
   part of the record; the record is usable only after the last of them.
2. Ringing: the power p_j of 1 ms blocks of the record with steady mains hum cancelled by
   a one-period comb difference (x_n - x_{n+P}, P = fs / f_mains) is compared with the median power of the blocks
   3 to 10 ms later, rho_j = p_j / median(p_{j+3..j+10}).  An FID with T2* >= 10 ms gives
   rho <= exp(2 * 6.5 ms / T2*) < 4; the ringing of a coil or preamplifier after switch-off
   (time constants of a few ms) gives rho >> 4.  The test starts at the block of highest
   power within the first 50 ms (a recording may begin before the switch-off, quiet), and
   the transient ends at the first block after it with rho <= RATIO_THRESHOLD [common
   practice, no source].  A quiet lead-in followed by a jump in power without ringing is
   skipped up to one block past the jump.  What is left of it then holds at most
   (RATIO_THRESHOLD - 1) times the block power and decays with the power time constant
   tau_p fitted to the log block powers of the transient, so a margin
   tau_p ln((RATIO_THRESHOLD - 1) / RESIDUAL_FRACTION) brings it below RESIDUAL_FRACTION
   (1 %) of the signal-plus-noise power.

`find_usable_start` returns a Blanking with the first usable sample and the reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

BLOCK_S = 0.001
COMPARE_BLOCKS = (3, 10)
RATIO_THRESHOLD = 4.0
RESIDUAL_FRACTION = 0.01
SEARCH_S = 0.25
ONSET_SEARCH_S = 0.05
CLIP_FRACTION = 0.999
OVERLOAD_RECOVERY_S = 0.001


@dataclass(frozen=True)
class Blanking:
    """First usable sample (index into the record) and what was found before it."""

    start_sample: int
    overload_end_sample: int | None
    ringing_end_sample: int | None
    ringing_time_constant_s: float | None

    @property
    def reason(self) -> str:
        parts = []
        if self.overload_end_sample is not None:
            parts.append("overload")
        if self.ringing_end_sample is not None:
            parts.append("ringing" if self.ringing_time_constant_s is not None else "lead-in")
        return "+".join(parts) or "none"


def overload_end(record: np.ndarray, first_sample: int, full_scale: float | None, sample_rate_hz: float) -> int | None:
    """Index after the last clipped sample (|x| >= 0.999 full scale) within SEARCH_S of first_sample, plus 1 ms.

    Without a known full scale, a run of at least 3 samples at the record's own extreme
    value counts as clipping (a flat top).
    """
    window = np.abs(np.asarray(record[first_sample:first_sample + int(SEARCH_S * sample_rate_hz)], dtype=float))
    if window.size == 0:
        return None
    if full_scale is not None and full_scale > 0:
        clipped = np.flatnonzero(window >= CLIP_FRACTION * full_scale)
    else:
        top = float(window.max())
        at_top = np.flatnonzero(window >= top * (1 - 1e-9)) if top > 0 else np.zeros(0, int)
        in_run = at_top.size >= 3 and bool(np.any(at_top[2:] - at_top[:-2] == 2))
        clipped = at_top if in_run else np.zeros(0, int)
    if clipped.size == 0:
        return None
    return first_sample + int(clipped[-1]) + 1 + int(OVERLOAD_RECOVERY_S * sample_rate_hz)


def comb_difference(x: np.ndarray, period_samples: float) -> np.ndarray:
    """y_n = x_n - x(n + P), x(n + P) linearly interpolated: cancels anything periodic with period P.

    Stationary mains hum (period P = fs / f_mains) drops out; a transient that has died
    away after P samples passes unchanged; a slowly decaying FID passes with a constant
    complex factor.  Returns len(x) - ceil(P) - 1 samples.
    """
    whole = int(math.floor(period_samples))
    frac = period_samples - whole
    n = x.size - whole - 1
    if n <= 0:
        return np.zeros(0)
    later = (1.0 - frac) * x[whole:whole + n] + frac * x[whole + 1:whole + 1 + n]
    return x[:n] - later


def _block_power(x: np.ndarray, block: int) -> np.ndarray:
    n_blocks = x.size // block
    blocks = x[:n_blocks * block].reshape(n_blocks, block)
    return np.mean((blocks - blocks.mean(axis=1, keepdims=True)) ** 2, axis=1) + 1e-300


def ringing_end(record: np.ndarray, first_sample: int, sample_rate_hz: float,
                mains_hz: tuple[float, ...] = (50.0, 60.0)) -> tuple[int | None, float | None]:
    """(index where the ringing transient is over, its power time constant in s), or (None, None).

    The block powers are taken of the comb difference (comb_difference) for each possible
    mains frequency, keeping the smaller in each block, so that steady mains hum cannot
    mimic a transient.  See the module docstring for the ratio test and the margin.
    """
    block = max(8, int(round(BLOCK_S * sample_rate_hz)))
    lo, hi = COMPARE_BLOCKS
    longest = int(math.ceil(max(sample_rate_hz / f for f in mains_hz))) + 1
    x = np.asarray(record[first_sample:first_sample + int(SEARCH_S * sample_rate_hz) + longest], dtype=float)
    diffs = [comb_difference(x, sample_rate_hz / f) for f in mains_hz]
    n = min(d.size for d in diffs)
    if n // block < hi + 2:
        return None, None
    power = np.min([_block_power(d[:n], block) for d in diffs], axis=0)
    later = np.lib.stride_tricks.sliding_window_view(power[lo:], hi - lo + 1)
    ratio = power[:later.shape[0]] / np.median(later, axis=1)
    onset = int(np.argmax(power[:min(ratio.size, int(ONSET_SEARCH_S / BLOCK_S))]))
    if ratio[onset] <= RATIO_THRESHOLD:
        if onset > 0 and np.median(power[:onset]) * RATIO_THRESHOLD < power[onset]:
            return first_sample + (onset + 1) * block, None  # a quiet lead-in before the switch-off
        return None, None
    below = np.flatnonzero(ratio[onset:] <= RATIO_THRESHOLD)
    end_block = onset + (int(below[0]) if below.size else ratio.size - onset)
    log_p = np.log(power[onset:end_block + 1])
    if end_block - onset >= 2:
        slope = np.polyfit(np.arange(end_block - onset) * BLOCK_S, log_p[:-1], 1)[0]
        tau_p = -1.0 / slope if slope < 0 else BLOCK_S
    else:
        tau_p = BLOCK_S / max(1e-9, log_p[0] - log_p[min(1, log_p.size - 1)]) if log_p.size > 1 else BLOCK_S
    tau_p = float(min(max(tau_p, 0.1 * BLOCK_S), 10 * BLOCK_S))
    margin_s = tau_p * math.log((RATIO_THRESHOLD - 1.0) / RESIDUAL_FRACTION)
    return first_sample + end_block * block + int(math.ceil(margin_s * sample_rate_hz)), tau_p


def find_usable_start(record: np.ndarray, first_sample: int, sample_rate_hz: float,
                      full_scale: float | None = None, mains_hz: tuple[float, ...] = (50.0, 60.0)) -> Blanking:
    """Overload test, then the ringing test from where the overload ended (module docstring)."""
    over = overload_end(record, first_sample, full_scale, sample_rate_hz)
    start = max(first_sample, over or first_sample)
    ring, tau = ringing_end(record, start, sample_rate_hz, mains_hz)
    return Blanking(start_sample=max(start, ring or start), overload_end_sample=over, ringing_end_sample=ring,
                    ringing_time_constant_s=tau)
