"""FID amplitude per series point (T1 series, nutation): stack, fit one point fully, fit the rest.

1. Each shot's acquisition window, receiver phase removed, impulses masked, is stacked with
   the other shots of its point (the mean of the usable samples at each sample).
2. The point with the largest stacked rms gets the full FID fit (fid_entry.fit_fid):
   frequency f and decay rate r = 1/T2*.
3. Every point is fitted with r fixed: s(t) = exp(-r t) (a cos 2 pi f t + b sin 2 pi f t),
   t from the FID's time zero; first linear at the reference f, then (if the point is clear
   of the noise) with f free too, so a slow drift of the field between points does not bias
   the amplitude.  The complex amplitude at time zero is a - i b.
4. Its phase is referred to the transmitter's frame, psi_tx = psi - 2 pi f_tx k0 / fs with k0
   the time-zero sample, so that points whose time zero moves (nutation) stay comparable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from controller.analysis.demodulate import impulse_mask, rotate_receiver_phase
from controller.analysis.fid_entry import fit_fid
from controller.analysis.shots import ShotLike, channel, good_shots, receiver_phase_rad, reference_frequency_hz
from controller.sequences.timeline import Timeline

FREE_FREQUENCY_MIN_SNR = 10.0
FREE_FREQUENCY_MAX_SHIFT_HZ = 1.0


@dataclass(frozen=True)
class PointStack:
    value: float
    shots: int
    window: np.ndarray  # stacked samples (nan where no shot was usable)
    time_zero_offset_s: float
    time_zero_sample: int
    frame_frequency_hz: float


@dataclass(frozen=True)
class SeriesAmplitudes:
    values: np.ndarray
    amplitudes: np.ndarray  # complex, ADC volts at time zero, transmitter frame
    amplitude_sd: np.ndarray
    shots: np.ndarray
    frequency_hz: float
    t2star_s: float


def stack_points(timeline: Timeline, shots: list[ShotLike]) -> list[PointStack]:
    """One PointStack per series point that has at least one good shot, in point order."""
    sums: dict[int, list] = {}
    for plan, shot in good_shots(timeline, shots):
        fs = shot.sample_rate_hz
        start, count = shot.acquire_start_sample, shot.acquire_samples
        window = rotate_receiver_phase(channel(shot)[start:start + count], receiver_phase_rad(plan))
        usable = impulse_mask(window)
        entry = sums.setdefault(plan.series_index, [plan, np.zeros(count), np.zeros(count), 0, shot])
        entry[1] += np.where(usable, window, 0.0)
        entry[2] += usable
        entry[3] += 1
    stacks = []
    for index in sorted(sums):
        plan, total, used, n, shot = sums[index]
        fs = shot.sample_rate_hz
        with np.errstate(invalid="ignore", divide="ignore"):
            window = np.where(used > 0, total / used, np.nan)
        k0 = shot.acquire_start_sample - int(round(shot.dead_time_s * fs))
        stacks.append(PointStack(value=plan.series_value if plan.series_value is not None else float(index),
                                 shots=n, window=window, time_zero_offset_s=shot.dead_time_s, time_zero_sample=k0,
                                 frame_frequency_hz=reference_frequency_hz(plan, timeline, 0.0)))
    return stacks


def _fixed_decay_fit(window: np.ndarray, fs: float, offset_s: float, frequency_hz: float, rate_per_s: float,
                     free_frequency: bool) -> tuple[complex, float, float]:
    """(a - i b, sd of |amplitude|, frequency) of exp(-r t)(a cos + b sin) with r fixed."""
    ok = np.isfinite(window)
    y = window[ok] - np.mean(window[ok])
    t = offset_s + np.flatnonzero(ok) / fs
    e = np.exp(-rate_per_s * t)

    def basis(f: float) -> np.ndarray:
        return np.stack([e * np.cos(2 * np.pi * f * t), e * np.sin(2 * np.pi * f * t)], axis=1)

    coef, *_ = np.linalg.lstsq(basis(frequency_hz), y, rcond=None)
    f = frequency_hz
    resid = y - basis(f) @ coef
    sigma = float(np.sqrt(resid @ resid / max(1, y.size - 2)))
    amp_sd = sigma / math.sqrt(float(np.sum(e**2)) / 2.0)
    if free_frequency and math.hypot(*coef) > FREE_FREQUENCY_MIN_SNR * amp_sd:
        def residual_and_jacobian(p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            phase = 2 * np.pi * p[0] * t
            c, s = e * np.cos(phase), e * np.sin(phase)
            d_f = 2 * np.pi * t * (-p[1] * s + p[2] * c)
            return c * p[1] + s * p[2] - y, np.stack([d_f, c, s], axis=1)

        res = least_squares(lambda p: residual_and_jacobian(p)[0], np.array([f, *coef]),
                            jac=lambda p: residual_and_jacobian(p)[1], method="lm", x_scale="jac")
        if abs(res.x[0] - frequency_hz) < FREE_FREQUENCY_MAX_SHIFT_HZ:
            f, coef = float(res.x[0]), res.x[1:]
    return complex(coef[0], -coef[1]), amp_sd, f


def series_amplitudes(timeline: Timeline, shots: list[ShotLike], band_hz: tuple[float, float]) -> SeriesAmplitudes:
    """Complex FID amplitude at time zero for every series point; see module docstring."""
    stacks = stack_points(timeline, shots)
    if len(stacks) < 2:
        raise ValueError(f"{len(stacks)} series point(s) with usable shots; a series fit needs at least 2")
    fs = timeline.sample_rate_hz
    strongest = max(stacks, key=lambda p: float(np.nanstd(p.window)))
    reference = fit_fid(np.nan_to_num(strongest.window), fs, strongest.time_zero_offset_s, band_hz)
    rate = 1.0 / reference.t2star_s if math.isfinite(reference.t2star_s) and reference.t2star_s > 0 else 0.0
    amplitudes, sds = [], []
    for point in stacks:
        amplitude, sd, _ = _fixed_decay_fit(point.window, fs, point.time_zero_offset_s, reference.frequency_hz,
                                            rate, free_frequency=True)
        frame = point.frame_frequency_hz or reference.frequency_hz
        amplitudes.append(amplitude * np.exp(-2j * np.pi * frame * point.time_zero_sample / fs))
        sds.append(sd)
    return SeriesAmplitudes(values=np.array([p.value for p in stacks]), amplitudes=np.array(amplitudes),
                            amplitude_sd=np.array(sds), shots=np.array([p.shots for p in stacks]),
                            frequency_hz=reference.frequency_hz, t2star_s=reference.t2star_s)
