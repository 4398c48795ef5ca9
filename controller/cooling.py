"""Cooling pauses: where a run or schedule must wait, coil off, to stay within its limits.

`plan_cooling_pauses(shots, rig)` walks the shots in order with the rig's thermal model and
the duty-cycle window.  Before each shot it asks: would this shot, started now, push the
predicted coil temperature above the planning limit (`limits.max_coil_temperature_c` less
`limits.planning_margin_k`) or the duty over
`limits.max_duty_cycle`?  If so it finds the shortest pause (to PAUSE_RESOLUTION_S, by
doubling then bisection) after which the shot fits, and records it.  A shot that does not
fit even from a cold coil cannot be mended by waiting: it is reported as infeasible.

`insert_cooling_pauses(timeline, pauses)` applies the pauses by lengthening the recovery of
the shot before each pause.  A schedule (a list of runs) can use `plan_cooling_pauses` on
the concatenated shots of its runs and wait the returned time between runs.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Callable, Sequence

from controller.checks import planning_limit_c
from controller.config.schema import RigConfig
from controller.physics.thermal import CoilThermal, ThermalState
from controller.rigmodel import coil_thermal_model
from controller.sequences.timeline import Recover, ShotPlan, Timeline
from controller.thermal_plan import max_window_duty, on_intervals, predict_temperature, shot_steps

PAUSE_RESOLUTION_S = 0.1
MAX_PAUSE_S = 7 * 86400.0


@dataclass(frozen=True)
class CoolingPause:
    """Wait pause_s with the coil off before the shot at position before_shot (0-based)."""

    before_shot: int
    pause_s: float
    reason: str


@dataclass(frozen=True)
class CoolingPlan:
    pauses: tuple[CoolingPause, ...]
    infeasible_shots: tuple[int, ...]  # shots over a limit even from a cold, rested coil
    peak_c: float  # predicted peak with the pauses applied

    @property
    def total_pause_s(self) -> float:
        return sum(p.pause_s for p in self.pauses)


def _fits(model: CoilThermal, state: ThermalState, shot: ShotPlan, start_s: float,
          history: list[tuple[float, float]], rig: RigConfig) -> tuple[bool, str, float, ThermalState]:
    """Would the shot starting at start_s, from state, keep within the limits?"""
    steps = shot_steps(shot, start_s)
    prediction = predict_temperature(model, steps, start_state=state)
    window = rig.limits.duty_window_s
    recent = [iv for iv in history if iv[1] > start_s - window]
    duty, _ = max_window_duty(recent + on_intervals(steps), window)
    if prediction.peak_c > planning_limit_c(rig):
        return False, f"predicted {prediction.peak_c:.1f} C > {planning_limit_c(rig):g} C", \
            prediction.peak_c, prediction.final_state
    if duty > rig.limits.max_duty_cycle:
        return False, f"duty {duty:.2f} > {rig.limits.max_duty_cycle:g}", prediction.peak_c, prediction.final_state
    return True, "", prediction.peak_c, prediction.final_state


def plan_cooling_pauses(shots: Sequence[ShotPlan], rig: RigConfig, start_c: float | None = None) -> CoolingPlan:
    """Pauses needed before shots so that no shot exceeds the temperature or duty limit.

    shots: the shot plans in the order they will run (a Timeline's shots, or the shots of
    several runs of a schedule back to back).  start_c: the coil temperature at the start
    (the rig's ambient if None).  Pure: reads the rig's thermal model and limits only.
    """
    model = coil_thermal_model(rig.coil)
    state = model.initial_state(rig.coil.ambient_c if start_c is None else start_c)
    history: list[tuple[float, float]] = []
    now_s = 0.0
    pauses: list[CoolingPause] = []
    infeasible: list[int] = []
    peak = model.winding_c(state)
    for position, shot in enumerate(shots):
        ok, reason, shot_peak, end_state = _fits(model, state, shot, now_s, history, rig)
        if not ok:
            cold_ok, *_ = _fits(model, model.initial_state(model.ambient_c), shot, 0.0, [], rig)
            if not cold_ok:
                infeasible.append(position)
            else:
                pause = _shortest_pause(model, state, shot, now_s, history, rig)
                pauses.append(CoolingPause(position, pause, reason))
                state = model.advance(state, 0.0, pause)
                now_s += pause
                ok, _, shot_peak, end_state = _fits(model, state, shot, now_s, history, rig)
        history.extend(on_intervals(shot_steps(shot, now_s)))
        history = [iv for iv in history if iv[1] > now_s - rig.limits.duty_window_s]
        peak = max(peak, shot_peak)
        state = end_state
        now_s += shot.duration_s
    return CoolingPlan(tuple(pauses), tuple(infeasible), peak)


def _shortest_pause(model: CoilThermal, state: ThermalState, shot: ShotPlan, now_s: float,
                    history: list[tuple[float, float]], rig: RigConfig) -> float:
    return shortest_wait_s(lambda pause_s: _fits(model, model.advance(state, 0.0, pause_s), shot, now_s + pause_s,
                                                 history, rig)[0])


def shortest_wait_s(fits_after: Callable[[float], bool]) -> float:
    """Least wait (to PAUSE_RESOLUTION_S, rounded up) for which fits_after(wait) holds.

    fits_after must turn true for long waits and stay true (a coil only cools while off).
    Doubling finds a bracket, bisection narrows it; gives up past MAX_PAUSE_S.
    """
    if fits_after(0.0):
        return 0.0
    hi = PAUSE_RESOLUTION_S
    while not fits_after(hi):
        if hi > MAX_PAUSE_S:
            return hi
        hi *= 2.0
    lo = hi / 2.0 if hi > PAUSE_RESOLUTION_S else 0.0
    while hi - lo > PAUSE_RESOLUTION_S:
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if fits_after(mid) else (mid, hi)
    return round(math.ceil(hi / PAUSE_RESOLUTION_S - 1e-9) * PAUSE_RESOLUTION_S, 6)


def insert_cooling_pauses(timeline: Timeline, pauses: Sequence[CoolingPause]) -> Timeline:
    """The timeline with each pause added to the recovery of the shot before it.

    A pause before the first shot cannot be expressed in a timeline (the engine starts the
    first shot at once): the caller must wait, or refuse; ValueError says so.
    """
    extra = {p.before_shot: p.pause_s for p in pauses}
    if extra.get(0, 0.0) > 0.0:
        raise ValueError(f"the coil must cool {extra[0]:.0f} s before the first shot; wait, then start")
    shots = list(timeline.shots)
    for position, pause_s in extra.items():
        prev = shots[position - 1]
        events = tuple(dataclasses.replace(e, duration_s=e.duration_s + pause_s) if isinstance(e, Recover) else e
                       for e in prev.events)
        if not any(isinstance(e, Recover) for e in prev.events):
            events = events + (Recover(start_s=prev.duration_s, duration_s=pause_s),)
        shots[position - 1] = dataclasses.replace(prev, events=events, duration_s=prev.duration_s + pause_s)
    notes = timeline.notes + ((f"{len(extra)} cooling pause(s), {sum(extra.values()):.1f} s in all",) if extra else ())
    return dataclasses.replace(timeline, shots=tuple(shots), notes=notes)
