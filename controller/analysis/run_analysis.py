"""Analyse a run's shots: stack the signal channel's acquisition windows and fit the FID.

Frequency -> field with the chosen proton gyromagnetic ratio: B = f / (gamma/2pi); the value
used is stored with the result.  sd(B) = sd(f) / (gamma/2pi).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Iterable

import numpy as np

from controller.analysis.fit import fit_damped_sine
from controller.analysis.stack import stack_windows
from controller.physics.constants import gamma_hz_per_nt

DEFAULT_BAND_HZ = (1000.0, 3500.0)


@dataclass(frozen=True)
class ShotWindow:
    """The parts of a shot the analysis needs."""

    signal: np.ndarray  # one channel, whole segment, volts
    sample_rate_hz: float
    time_zero_sample: int  # end of switch-off ramp or of the last pulse
    acquire_start_sample: int
    acquire_samples: int


def analyse_shots(shots: Iterable[ShotWindow], gamma: str | float = "shielded",
                  band_hz: tuple[float, float] = DEFAULT_BAND_HZ) -> dict[str, Any]:
    shots = list(shots)
    if not shots:
        raise ValueError("no shots to analyse")
    first = shots[0]
    fs = first.sample_rate_hz
    windows = [s.signal[s.acquire_start_sample:s.acquire_start_sample + s.acquire_samples] for s in shots]
    stacked = stack_windows(windows)
    offset_s = (first.acquire_start_sample - first.time_zero_sample) / fs
    fit = fit_damped_sine(stacked, fs, offset_s, band_hz)
    g = gamma_hz_per_nt(gamma)
    return {
        "shots": len(shots),
        "frequency_hz": fit.frequency_hz,
        "frequency_sd_hz": fit.frequency_sd_hz,
        "field_nt": fit.frequency_hz / g,
        "field_sd_nt": fit.frequency_sd_hz / g,
        "t2star_s": fit.t2star_s,
        "t2star_sd_s": fit.t2star_sd_s,
        "amplitude": fit.amplitude,
        "phase_rad": fit.phase_rad,
        "snr": fit.snr,
        "dead_time_s": offset_s,
        "sample_rate_hz": fs,
        "gamma_hz_per_nt": g,
    }


def window_of(samples: np.ndarray, channel_names: tuple[str, ...], sample_rate_hz: float, acquire_start_sample: int,
              acquire_samples: int, dead_time_s: float, channel: str = "signal") -> ShotWindow:
    """A ShotWindow from a stored or live shot; time zero lies dead_time_s before the acquisition."""
    index = channel_names.index(channel) if channel in channel_names else 0
    return ShotWindow(signal=np.asarray(samples[index], dtype=float), sample_rate_hz=sample_rate_hz,
                      time_zero_sample=acquire_start_sample - int(round(dead_time_s * sample_rate_hz)),
                      acquire_start_sample=acquire_start_sample, acquire_samples=acquire_samples)
