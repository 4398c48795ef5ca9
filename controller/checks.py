"""Checks before running: pure functions from (timeline, rig) to a list of violations.

`precess check` prints them; `precess run` refuses to start when there is any.
"""

from __future__ import annotations

from dataclasses import dataclass

from controller.config.schema import RigConfig
from controller.physics.circuit import flyback_energy_j
from controller.rigmodel import coil_model, coil_thermal_model
from controller.sequences.timeline import Acquire, Polarise, Pulse, Timeline


@dataclass(frozen=True)
class Violation:
    """One limit exceeded: what, by how much, and the limit."""

    check: str
    value: float
    limit: float
    unit: str
    where: str

    def __str__(self) -> str:
        over = self.value - self.limit
        return (f"{self.check}: {self.value:.4g} {self.unit} exceeds the limit {self.limit:.4g} {self.unit} "
                f"by {over:.4g} {self.unit} ({self.where})")


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
    """Duty = time with current on / total run time."""
    on_s = sum(e.duration_s for s in timeline.shots for e in s.of_kind(Polarise))
    total = timeline.duration_s
    duty = on_s / total if total > 0 else 0.0
    if duty > rig.limits.max_duty_cycle:
        return [Violation("coil duty cycle", duty, rig.limits.max_duty_cycle, "", "whole run")]
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


def predicted_peak_temperature_c(timeline: Timeline, rig: RigConfig, start_c: float | None = None) -> float:
    """Peak coil temperature over the run from the first-order thermal model (controller.physics.thermal)."""
    model = coil_thermal_model(rig.coil)
    temperature = rig.coil.ambient_c if start_c is None else start_c
    peak = temperature
    for shot in timeline.shots:
        on_s = 0.0
        for e in shot.of_kind(Polarise):
            temperature = model.step(temperature, e.current_a, e.duration_s)
            peak = max(peak, temperature)
            on_s += e.duration_s
        temperature = model.step(temperature, 0.0, shot.duration_s - on_s)
    return peak


def check_temperature(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    peak = predicted_peak_temperature_c(timeline, rig)
    if peak > rig.limits.max_coil_temperature_c:
        return [Violation("predicted coil temperature", peak, rig.limits.max_coil_temperature_c, "C",
                          "first-order thermal model over the whole run")]
    return []


ALL_CHECKS = (check_current, check_polarise_time, check_duty_cycle, check_flyback_energy,
              check_pulse_amplitude, check_acquisition, check_temperature)


def check_all(timeline: Timeline, rig: RigConfig) -> list[Violation]:
    """Every pre-run check; an empty list means the run may start."""
    return [v for check in ALL_CHECKS for v in check(timeline, rig)]
