"""Echo amplitudes from Hahn-echo and CPMG shots.

For each shot: demodulate the signal channel at the refocusing pulses' frequency with the
segment's sample clock as phase reference (demodulate.demodulate), mask impulses and every
sample outside the receiver windows, and average z over +/- w/2 around each echo centre the
timeline marks.  Remove the receiver phase, then average over the shots of the same point.

In the transmitter's frame a spin echo is refocused whatever an isochromat's offset, so the
echo phase does not depend on the field's drift and the complex amplitudes of a train (or of
a series of echo times) line up on one axis; principal_axis_projection turns them into signed
amplitudes without the noise bias of a magnitude.  Echo shapes are the same for every echo,
so the window's average is the same fraction of each echo's peak and ratios are unbiased.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from controller.analysis.demodulate import MAD_TO_SIGMA, demodulate, impulse_mask, window_means
from controller.analysis.shots import ShotLike, channel, good_shots, receiver_phase_rad
from controller.sequences.timeline import Acquire, EchoCentre, Pulse, ShotPlan, Timeline


@dataclass(frozen=True)
class EchoTable:
    """Complex echo amplitudes (ADC volts, receiver phase removed), one row per series point."""

    values: np.ndarray  # series value per row (echo time for an echo series)
    echo_times_s: np.ndarray  # (rows, echoes): from the excitation
    amplitudes: np.ndarray  # (rows, echoes) complex, mean over shots
    shot_scatter: np.ndarray  # (rows, echoes) sd of the mean from the shot-to-shot scatter (nan for 1 shot)
    noise_sd: np.ndarray  # (rows, echoes) sd of one component of the mean from the sample noise in the windows
    shots: np.ndarray  # shots per row
    frequency_hz: float


def _usable_samples(plan: ShotPlan, signal: np.ndarray) -> np.ndarray:
    usable = np.zeros(signal.size, dtype=bool)
    for window in plan.of_kind(Acquire):
        lo, hi = window.start_sample, min(signal.size, window.start_sample + window.n_samples)
        usable[lo:hi] = True
    inside = np.flatnonzero(usable)
    if inside.size:
        usable[inside] = impulse_mask(signal[inside])
    return usable


def shot_echo_amplitudes(plan: ShotPlan, shot: ShotLike,
                         half_window_samples: int) -> tuple[np.ndarray, np.ndarray, float]:
    """Complex amplitude of every echo of one shot (receiver phase removed), its sd and the frequency used.

    The sd of one component of a window mean is sigma sqrt(2 / N), sigma = 1.4826 MAD of the
    usable samples in the window (conservative when the echo itself is well above the noise).
    """
    pulses = plan.of_kind(Pulse)
    if not pulses:
        raise ValueError(f"shot {plan.index} has no refocusing pulse")
    frequency = pulses[-1].frequency_hz
    signal = channel(shot)
    z = demodulate(signal, shot.sample_rate_hz, frequency)
    centres = np.array([e.sample for e in plan.of_kind(EchoCentre)])
    usable = _usable_samples(plan, signal)
    means, counts = window_means(z, usable, centres, half_window_samples)
    sds = np.full(len(centres), np.nan)
    for i, c in enumerate(centres):
        lo, hi = max(0, c - half_window_samples), c + half_window_samples + 1
        values = signal[lo:hi][usable[lo:hi]]
        if values.size > 1:
            sds[i] = MAD_TO_SIGMA * np.median(np.abs(values - np.median(values))) * np.sqrt(2.0 / values.size)
    return means * np.exp(-1j * receiver_phase_rad(plan)), sds, frequency


def echo_table(timeline: Timeline, shots: list[ShotLike], echo_window_s: float) -> EchoTable:
    """Stack the echo amplitudes of every point over its shots."""
    fs = timeline.sample_rate_hz
    half = max(1, int(round(echo_window_s * fs / 2)))
    rows: dict[int, list] = {}
    frequency = float("nan")
    for plan, shot in good_shots(timeline, shots):
        amps, sds, frequency = shot_echo_amplitudes(plan, shot, half)
        entry = rows.setdefault(plan.series_index, [plan, [], []])
        entry[1].append(amps)
        entry[2].append(sds)
    if not rows:
        raise ValueError("no usable shots")
    values, times, means, scatter, noise, counts = [], [], [], [], [], []
    for index in sorted(rows):
        plan, amps, sds = rows[index]
        stack = np.array(amps)
        values.append(plan.series_value if plan.series_value is not None else float(index))
        times.append([e.echo_time_s for e in plan.of_kind(EchoCentre)])
        means.append(np.nanmean(stack, axis=0))
        n = stack.shape[0]
        scatter.append(np.abs(np.nanstd(stack, axis=0, ddof=1)) / np.sqrt(n) if n > 1 else np.full(stack.shape[1], np.nan))
        noise.append(np.sqrt(np.nansum(np.square(sds), axis=0)) / n)
        counts.append(n)
    return EchoTable(values=np.array(values), echo_times_s=np.array(times), amplitudes=np.array(means),
                     shot_scatter=np.array(scatter), noise_sd=np.array(noise), shots=np.array(counts),
                     frequency_hz=frequency)

