"""The coil's current over a planned run, and the temperature and duty cycle it leads to.

A Timeline becomes a contiguous list of constant-current steps (the Polarise events, with
the coil off in between); a thermal model (controller.physics.thermal) is then advanced
exactly over each step.  Pure functions: nothing here touches hardware.
"""

from __future__ import annotations

import bisect
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from controller.physics.thermal import CoilThermal, ThermalState
from controller.sequences.timeline import Polarise, ShotPlan

POINTS_PER_STEP = 8  # interior samples per step for models whose peak may fall inside a step


@dataclass(frozen=True)
class CurrentStep:
    """The coil carries current_a from start_s (from the run's start) for duration_s."""

    start_s: float
    duration_s: float
    current_a: float

    @property
    def end_s(self) -> float:
        return self.start_s + self.duration_s


def shot_steps(shot: ShotPlan, offset_s: float = 0.0) -> list[CurrentStep]:
    """The steps of one shot, starting at offset_s; the coil is off outside its Polarise events."""
    steps: list[CurrentStep] = []
    cursor = 0.0
    for e in sorted(shot.of_kind(Polarise), key=lambda e: e.start_s):
        if e.start_s > cursor:
            steps.append(CurrentStep(offset_s + cursor, e.start_s - cursor, 0.0))
        steps.append(CurrentStep(offset_s + e.start_s, e.duration_s, e.current_a))
        cursor = max(cursor, e.start_s + e.duration_s)
    if shot.duration_s > cursor:
        steps.append(CurrentStep(offset_s + cursor, shot.duration_s - cursor, 0.0))
    return steps


def current_profile(shots: Sequence[ShotPlan]) -> tuple[CurrentStep, ...]:
    """Contiguous constant-current steps covering the shots back to back."""
    steps: list[CurrentStep] = []
    offset = 0.0
    for shot in shots:
        steps.extend(shot_steps(shot, offset))
        offset += shot.duration_s
    return tuple(steps)


@dataclass(frozen=True)
class TemperaturePrediction:
    """Winding temperature at every point of a run: times_s from its start, current_a held there."""

    times_s: np.ndarray
    current_a: np.ndarray
    winding_c: np.ndarray
    final_state: ThermalState

    @property
    def peak_c(self) -> float:
        return float(np.max(self.winding_c))

    @property
    def peak_at_s(self) -> float:
        return float(self.times_s[int(np.argmax(self.winding_c))])


def predict_temperature(model: CoilThermal, steps: Sequence[CurrentStep], start_c: float | None = None,
                        start_state: ThermalState | None = None, max_step_s: float | None = None
                        ) -> TemperaturePrediction:
    """Advance the model over the steps; a point at every step boundary and inside steps.

    Interior points (POINTS_PER_STEP per step, or every max_step_s if given) catch a peak
    inside a step, which a two-node model can have; for the one-node model the extremes lie
    on the boundaries.  The propagators repeat from shot to shot, so they are cached.
    """
    state = start_state if start_state is not None else model.initial_state(
        model.ambient_c if start_c is None else start_c)
    t0 = steps[0].start_s if steps else 0.0
    times, currents, temps = [t0], [steps[0].current_a if steps else 0.0], [model.winding_c(state)]
    for step in steps:
        n = POINTS_PER_STEP if max_step_s is None else max(1, int(np.ceil(step.duration_s / max_step_s)))
        dt = step.duration_s / n
        for k in range(1, n + 1):
            state = model.advance(state, step.current_a, dt)
            times.append(step.start_s + k * dt)
            currents.append(step.current_a)
            temps.append(model.winding_c(state))
    return TemperaturePrediction(np.array(times), np.array(currents), np.array(temps), state)


def on_intervals(steps: Sequence[CurrentStep], threshold_a: float = 0.0) -> list[tuple[float, float]]:
    """(start_s, end_s) of the steps carrying more than threshold_a, adjacent ones merged."""
    merged: list[tuple[float, float]] = []
    for s in steps:
        if s.current_a > threshold_a and s.duration_s > 0:
            if merged and abs(merged[-1][1] - s.start_s) < 1e-12:
                merged[-1] = (merged[-1][0], s.end_s)
            else:
                merged.append((s.start_s, s.end_s))
    return merged


def max_window_duty(intervals: Sequence[tuple[float, float]], window_s: float) -> tuple[float, float]:
    """Largest fraction of any window of window_s spent on, and the window's end time.

    duty(t) = (time on within [t - window_s, t]) / window_s, time before the first interval
    counted as off.  The maximum of this piecewise-linear function lies where a window ends
    at an interval's end or starts at an interval's start, so only those ends are tried.
    """
    if not intervals:
        return 0.0, 0.0
    starts = [a for a, _ in intervals]
    ends = [b for _, b in intervals]
    cumulative = np.concatenate([[0.0], np.cumsum([b - a for a, b in intervals])])

    def on_before(t: float) -> float:
        k = bisect.bisect_right(starts, t)  # intervals starting at or before t
        if k == 0:
            return 0.0
        a, b = intervals[k - 1]
        return float(cumulative[k - 1] + min(b, t) - a)

    best, best_end = 0.0, ends[0]
    for t in ends + [a + window_s for a in starts]:
        duty = (on_before(t) - on_before(t - window_s)) / window_s
        if duty > best + 1e-12:
            best, best_end = duty, t
    return best, best_end
