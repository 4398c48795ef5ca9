"""What the sequence analyses read from a shot, whether live (ShotAcquired) or stored (StoredShot)."""

from __future__ import annotations

from typing import Protocol

import numpy as np

from controller.sequences.timeline import Acquire, Pulse, ShotPlan, Timeline


class ShotLike(Protocol):
    shot_index: int
    sample_rate_hz: float
    channel_names: tuple[str, ...]
    samples: np.ndarray
    acquire_start_sample: int
    acquire_samples: int
    dead_time_s: float
    bad: bool


def channel(shot: ShotLike, name: str = "signal") -> np.ndarray:
    """One channel of a shot as float64 (the first channel if `name` is absent)."""
    index = shot.channel_names.index(name) if name in shot.channel_names else 0
    return np.asarray(shot.samples[index], dtype=float)


def good_shots(timeline: Timeline, shots: list[ShotLike]) -> list[tuple[ShotPlan, ShotLike]]:
    """(plan, shot) pairs for the shots not marked bad, matched by shot index."""
    plans = {p.index: p for p in timeline.shots}
    return [(plans[s.shot_index], s) for s in shots if not s.bad and s.shot_index in plans]


def receiver_phase_rad(plan: ShotPlan) -> float:
    windows = plan.of_kind(Acquire)
    return windows[0].receiver_phase_rad if windows else 0.0


def reference_frequency_hz(plan: ShotPlan, timeline: Timeline, fallback_hz: float) -> float:
    """Frequency of the shot's frame: its last pulse before acquisition, else the timeline's Larmor, else fallback."""
    first, _ = plan.acquisition_span()
    pulses = [p for p in plan.of_kind(Pulse) if p.start_sample < first]
    if pulses:
        return pulses[-1].frequency_hz
    return timeline.larmor_hz if timeline.larmor_hz is not None else fallback_hz
