"""Checks before running: pure functions from (timeline, rig) to a list of violations.

`precess check` prints them; `precess run` refuses to start when there is any.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from controller.config.schema import RigConfig
from controller.physics.circuit import flyback_energy_j
from controller.rigmodel import coil_model, coil_thermal_model
from controller.sequences.timeline import Acquire, EchoCentre, Polarise, Pulse, ShotPlan, SwitchOff, Timeline
from controller.thermal_plan import (
    TemperaturePrediction, current_profile, max_window_duty, on_intervals, predict_temperature,
)

#: Insulation thermal classes, hot-spot temperature in C (IEC 60085).
INSULATION_CLASS_C = {"A": 105.0, "E": 120.0, "B": 130.0, "F": 155.0, "H": 180.0}
#: Hot spot above the resistance-measured average: 10 K [mem: IEC 60034-1 thermal class tables].
HOTSPOT_ALLOWANCE_K = 10.0


@dataclass(frozen=True)
class Violation:
    """One limit exceeded: what, by how much, and the limit."""

    check: str
    value: float
    limit: float
    unit: str
    where: str
    bound: str = "maximum"

    def __str__(self) -> str:
        if self.bound == "minimum":
            return (f"{self.check}: {self.value:.4g} {self.unit} is below the minimum {self.limit:.4g} {self.unit} "
                    f"by {self.limit - self.value:.4g} {self.unit} ({self.where})")
        over = self.value - self.limit
        unit = f" {self.unit}" if self.unit else ""
        return (f"{self.check}: {self.value:.4g}{unit} exceeds the limit {self.limit:.4g}{unit} "
                f"by {over:.4g}{unit} ({self.where})")


def _max_event(timeline: Timeline, kind: type, attribute: str) -> tuple[float, int]:
    best, where = 0.0, -1
    for shot in timeline.shots:
        for e in shot.of_kind(kind):
            if getattr(e, attribute) > best:
                best, where = getattr(e, attribute), shot.index
    return best, where


def check_current(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    value, shot = _max_event(timeline, Polarise, "current_a")
    if value > rig.limits.max_current_a:
        return [Violation("polarising current", value, rig.limits.max_current_a, "A", f"shot {shot}")]
    return []


def check_polarise_time(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    value, shot = _max_event(timeline, Polarise, "duration_s")
    if value > rig.limits.max_polarise_s:
        return [Violation("polarising time", value, rig.limits.max_polarise_s, "s", f"shot {shot}")]
    return []


def check_duty_cycle(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """Duty = largest share of any duty_window_s spent with current on (time before the run off).

    The supervisor measures the same quantity during the run (controller.supervisor).
    """
    steps = current_profile(timeline.shots)
    duty, end_s = max_window_duty(on_intervals(steps), rig.limits.duty_window_s)
    if duty > rig.limits.max_duty_cycle:
        return [Violation("coil duty cycle", duty, rig.limits.max_duty_cycle, "",
                          f"over the {rig.limits.duty_window_s:g} s ending {end_s:.1f} s into the run")]
    return []


def check_flyback_energy(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """Energy stored in the coil at switch-off, E = 1/2 L I^2."""
    current, shot = _max_event(timeline, Polarise, "current_a")
    energy = flyback_energy_j(coil_model(rig.coil).inductance_h, current)
    if energy > rig.limits.max_flyback_energy_j:
        return [Violation("flyback energy 1/2 L I^2", energy, rig.limits.max_flyback_energy_j, "J", f"shot {shot}")]
    return []


def check_pulse_amplitude(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    value, shot = _max_event(timeline, Pulse, "amplitude_v")
    if value > rig.limits.max_pulse_amplitude_v:
        return [Violation("pulse amplitude", value, rig.limits.max_pulse_amplitude_v, "V", f"shot {shot}")]
    return []


def check_acquisition(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    value, shot = _max_event(timeline, Acquire, "duration_s")
    if value > rig.limits.max_acquire_s:
        return [Violation("acquisition time", value, rig.limits.max_acquire_s, "s", f"shot {shot}")]
    return []


def predict_run_temperature(timeline: Timeline, rig: RigConfig, start_c: float | None = None) -> TemperaturePrediction:
    """Coil temperature at every point of the run from the rig's thermal model (one or two nodes)."""
    return predict_temperature(coil_thermal_model(rig.coil), current_profile(timeline.shots),
                               start_c=rig.coil.ambient_c if start_c is None else start_c)


def predicted_peak_temperature_c(timeline: Timeline, rig: RigConfig, start_c: float | None = None) -> float:
    """Peak coil temperature over the run (controller.physics.thermal, thermal_two_node)."""
    return predict_run_temperature(timeline, rig, start_c).peak_c


def _shot_at(timeline: Timeline, at_s: float) -> int:
    elapsed = 0.0
    for shot in timeline.shots:
        elapsed += shot.duration_s
        if at_s <= elapsed + 1e-9:
            return shot.index
    return timeline.shots[-1].index if timeline.shots else -1


def planning_limit_c(rig: RigConfig) -> float:
    """The highest temperature a plan may reach: the limit less the planning margin.

    The margin leaves room for model error and readback noise, so that a run that passes
    its check does not trip the supervisor's measured-temperature check at the limit.
    """
    return rig.limits.max_coil_temperature_c - rig.limits.planning_margin_k


def check_temperature(timeline: Timeline, rig: RigConfig, start_c: float | None = None) -> list[Violation]:
    prediction = predict_run_temperature(timeline, rig, start_c)
    if prediction.peak_c > planning_limit_c(rig):
        start = rig.coil.ambient_c if start_c is None else start_c
        return [Violation("predicted coil temperature", prediction.peak_c, planning_limit_c(rig), "C",
                          f"{rig.limits.max_coil_temperature_c:g} C less a {rig.limits.planning_margin_k:g} K margin; "
                          f"{prediction.peak_at_s:.1f} s into the run, shot {_shot_at(timeline, prediction.peak_at_s)},"
                          f" from {start:.1f} C")]
    return []


def check_insulation_margin(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """The temperature limit must stay HOTSPOT_ALLOWANCE_K below the insulation class (IEC 60085)."""
    allowed = INSULATION_CLASS_C[rig.coil.insulation_class] - HOTSPOT_ALLOWANCE_K
    if rig.limits.max_coil_temperature_c > allowed:
        return [Violation("configured temperature limit", rig.limits.max_coil_temperature_c, allowed, "C",
                          f"insulation class {rig.coil.insulation_class} "
                          f"({INSULATION_CLASS_C[rig.coil.insulation_class]:g} C hot spot, IEC 60085) "
                          f"minus {HOTSPOT_ALLOWANCE_K:g} K for the hot spot above the average")]
    return []


def _excitation_edges(shot: ShotPlan, sample_rate_hz: float) -> list[int]:
    """Sample indices where the receiver is blinded: ends of pulses and of the switch-off ramp."""
    edges = [p.start_sample + p.n_samples for p in shot.of_kind(Pulse)]
    edges += [o.start_sample + int(round(o.ramp_s * sample_rate_hz)) for o in shot.of_kind(SwitchOff)]
    return sorted(edges)


def _shortest_gap(shot: ShotPlan, marks: list[int], sample_rate_hz: float) -> float | None:
    """Shortest time from an excitation edge to the next of the given sample marks (None without pairs)."""
    edges = _excitation_edges(shot, sample_rate_hz)
    gaps = [m - max(e for e in edges if e <= m) for m in marks if any(e <= m for e in edges)]
    return min(gaps) / sample_rate_hz if gaps else None


def _gap_violation(timeline: Timeline, rig: RigConfig, marks: Callable[[ShotPlan], list[int]],
                   label: str) -> list[Violation]:
    """A violation when some mark lies less than min_dead_time_s after the excitation edge before it."""
    worst, where = None, -1
    for shot in timeline.shots:
        gap = _shortest_gap(shot, marks(shot), timeline.sample_rate_hz)
        if gap is not None and (worst is None or gap < worst):
            worst, where = gap, shot.index
    if worst is not None and worst < rig.limits.min_dead_time_s:
        return [Violation(label, worst, rig.limits.min_dead_time_s, "s", f"shot {where}", bound="minimum")]
    return []


def check_receiver_dead_time(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """Every acquisition opens at least min_dead_time_s after the last pulse or switch-off before it."""
    return _gap_violation(timeline, rig, lambda shot: [a.start_sample for a in shot.of_kind(Acquire)],
                          "receiver dead time")


def check_echo_spacing(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """Each echo centre lies at least min_dead_time_s after the end of the refocusing pulse before it."""
    return _gap_violation(timeline, rig, lambda shot: [e.sample for e in shot.of_kind(EchoCentre)],
                          "refocusing pulse end to echo")


def check_transmit_duty(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """Transmitter duty = pulse time / sample-locked segment length, worst shot."""
    fs = timeline.sample_rate_hz
    worst, where = 0.0, -1
    for shot in timeline.shots:
        on = sum(p.n_samples for p in shot.of_kind(Pulse))
        duty = on / shot.segment_samples if shot.segment_samples else 0.0
        if duty > worst:
            worst, where = duty, shot.index
    if worst > rig.limits.max_transmit_duty_cycle:
        return [Violation("transmitter duty cycle", worst, rig.limits.max_transmit_duty_cycle, "",
                          f"shot {where}, over its {timeline.shots[where].segment_samples / fs:.3g} s segment")]
    return []


def check_segment_buffer(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """The sample-locked segment must fit the acquisition buffers (max_segment_samples)."""
    longest = max(timeline.shots, key=lambda s: s.segment_samples, default=None)
    if longest is not None and longest.segment_samples > rig.limits.max_segment_samples:
        return [Violation("acquisition buffer", longest.segment_samples, rig.limits.max_segment_samples, "samples",
                          f"shot {longest.index}, {longest.segment_samples / timeline.sample_rate_hz:.3g} s segment")]
    return []


ALL_CHECKS = (check_current, check_polarise_time, check_duty_cycle, check_flyback_energy,
              check_pulse_amplitude, check_acquisition, check_temperature, check_insulation_margin,
              check_receiver_dead_time, check_echo_spacing, check_transmit_duty, check_segment_buffer)


def check_all(timeline: Timeline, rig: RigConfig, start_c: float | None = None) -> list[Violation]:
    """Every pre-run check; an empty list means the run may start.

    start_c is the coil's temperature now (measured), if known; the ambient otherwise.
    """
    return [v for check in ALL_CHECKS
            for v in (check(timeline, rig, start_c) if check is check_temperature else check(timeline, rig))]
