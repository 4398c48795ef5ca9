"""Pure checks the supervisor runs on every status sample.

Each check takes a `Sample` (readings plus what the supervisor derived from them) and the
rig's configuration, and returns a `Finding` (check name, one-line reason with the numbers,
the numbers themselves) or None.  They run in the order of `CHECKS`; the first finding trips.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

from controller.config.schema import RigConfig


@dataclass(frozen=True)
class Sample:
    """One control-period sample as the checks see it; None = not measured."""

    at_s: float
    commanded_current_a: float
    settled: bool  # the last command is at least settle_s old
    current_a: float
    voltage_v: float
    expected_resistance_ohm: float  # R(T) of coil and leads at the model temperature
    resistance_c: float | None = None  # resistance method (supply V/I)
    thermistor_c: float | None = None  # board thermistor
    model_c: float = 20.0  # thermal model now
    predicted_c: float = 20.0  # thermal model at the planned end of the present pulse
    duty: float = 0.0  # on-time over the last duty_window_s
    board_silent_s: float | None = None  # since the board last answered; None = no board
    battery_v: float | None = None
    disk_free_mb: float | None = None


@dataclass(frozen=True)
class Finding:
    check: str
    reason: str
    values: dict[str, float] = field(default_factory=dict)


def over_current(s: Sample, rig: RigConfig) -> Finding | None:
    limit = rig.limits.max_current_a * (1.0 + rig.supervisor.over_current_fraction)
    if s.current_a > limit:
        return Finding("over_current", f"coil current {s.current_a:.3f} A exceeds {limit:.3f} A "
                       f"(max_current_a + {rig.supervisor.over_current_fraction:.0%}) by {s.current_a - limit:.3f} A",
                       {"current_a": s.current_a, "limit_a": limit, "commanded_a": s.commanded_current_a})
    return None


def _current_tolerance_a(s: Sample, rig: RigConfig) -> float:
    sup = rig.supervisor
    return max(sup.current_tolerance_fraction * s.commanded_current_a, sup.current_tolerance_a)


def open_coil(s: Sample, rig: RigConfig) -> Finding | None:
    sup = rig.supervisor
    if s.commanded_current_a <= 0 or not s.settled:
        return None
    if s.current_a < _current_tolerance_a(s, rig) and s.voltage_v >= 0.9 * sup.supply_compliance_v:
        return Finding("open_coil", f"open coil: the supply is at {s.voltage_v:.2f} V (limit {sup.supply_compliance_v:g} V) "
                       f"but only {s.current_a:.3f} A flows of {s.commanded_current_a:.3f} A set",
                       {"current_a": s.current_a, "voltage_v": s.voltage_v, "commanded_a": s.commanded_current_a,
                        "compliance_v": sup.supply_compliance_v})
    return None


def supply_compliance(s: Sample, rig: RigConfig) -> Finding | None:
    sup = rig.supervisor
    limit = sup.compliance_fraction * sup.supply_compliance_v
    if s.commanded_current_a > 0 and s.settled and s.voltage_v >= limit:
        return Finding("supply_compliance", f"supply in compliance: {s.voltage_v:.2f} V is {s.voltage_v - limit:.2f} V "
                       f"over {limit:.2f} V ({sup.compliance_fraction:.0%} of its {sup.supply_compliance_v:g} V limit); "
                       f"{s.current_a:.3f} A flows of {s.commanded_current_a:.3f} A set",
                       {"voltage_v": s.voltage_v, "limit_v": limit, "current_a": s.current_a,
                        "commanded_a": s.commanded_current_a})
    return None


def shorted_coil(s: Sample, rig: RigConfig) -> Finding | None:
    sup = rig.supervisor
    if s.commanded_current_a <= 0 or not s.settled or s.current_a < sup.sense_current_a:
        return None
    resistance = s.voltage_v / s.current_a
    floor = sup.short_resistance_fraction * s.expected_resistance_ohm
    if resistance < floor:
        return Finding("shorted_coil", f"shorted coil: V/I = {resistance:.3f} ohm, {floor - resistance:.3f} ohm below "
                       f"{floor:.3f} ohm ({sup.short_resistance_fraction:.0%} of the expected "
                       f"{s.expected_resistance_ohm:.3f} ohm)",
                       {"resistance_ohm": resistance, "limit_ohm": floor, "expected_ohm": s.expected_resistance_ohm,
                        "current_a": s.current_a, "voltage_v": s.voltage_v})
    return None


def readback_mismatch(s: Sample, rig: RigConfig) -> Finding | None:
    sup = rig.supervisor
    if not s.settled:
        return None
    tolerance = _current_tolerance_a(s, rig)
    values = {"current_a": s.current_a, "voltage_v": s.voltage_v, "commanded_a": s.commanded_current_a,
              "tolerance_a": tolerance}
    if s.commanded_current_a <= 0 and s.voltage_v > sup.off_voltage_v:
        return Finding("readback_mismatch", f"supply output still live ({s.voltage_v:.2f} V, {s.voltage_v - sup.off_voltage_v:.2f} V "
                       f"over {sup.off_voltage_v:g} V) though commanded off: switch it off at the supply",
                       values | {"limit_v": sup.off_voltage_v})
    error = abs(s.current_a - s.commanded_current_a)
    if error > tolerance:
        return Finding("readback_mismatch", f"supply reads {s.current_a:.3f} A but {s.commanded_current_a:.3f} A is set: "
                       f"{error:.3f} A off, {error - tolerance:.3f} A beyond the {tolerance:.3f} A tolerance", values)
    return None


def measured_over_temperature(s: Sample, rig: RigConfig) -> Finding | None:
    limit = rig.limits.max_coil_temperature_c
    for name, value in (("resistance method", s.resistance_c), ("thermistor", s.thermistor_c)):
        if value is not None and value > limit:
            return Finding("measured_over_temperature", f"coil at {value:.1f} C by the {name}, "
                           f"{value - limit:.1f} K over the {limit:g} C limit",
                           _known({"temperature_c": value, "limit_c": limit, "resistance_c": s.resistance_c,
                                   "thermistor_c": s.thermistor_c, "model_c": s.model_c}))
    return None


def predicted_over_temperature(s: Sample, rig: RigConfig) -> Finding | None:
    limit = rig.limits.max_coil_temperature_c
    value = max(s.model_c, s.predicted_c)
    if value > limit:
        return Finding("predicted_over_temperature", f"the thermal model predicts {value:.1f} C by the end of this "
                       f"pulse, {value - limit:.1f} K over the {limit:g} C limit (now {s.model_c:.1f} C)",
                       {"predicted_c": s.predicted_c, "model_c": s.model_c, "limit_c": limit})
    return None


def temperature_disagreement(s: Sample, rig: RigConfig) -> Finding | None:
    if s.resistance_c is None or s.thermistor_c is None:
        return None
    difference = abs(s.resistance_c - s.thermistor_c)
    tolerance = rig.supervisor.sensor_disagreement_k
    if difference > tolerance:
        return Finding("temperature_disagreement", f"resistance method reads {s.resistance_c:.1f} C, thermistor "
                       f"{s.thermistor_c:.1f} C: {difference:.1f} K apart, {difference - tolerance:.1f} K beyond "
                       f"{tolerance:g} K; one of them (or the cold resistance) is wrong",
                       {"resistance_c": s.resistance_c, "thermistor_c": s.thermistor_c, "tolerance_k": tolerance})
    return None


def duty_cycle(s: Sample, rig: RigConfig) -> Finding | None:
    limit = rig.limits.max_duty_cycle
    if s.duty > limit + 1e-9:
        return Finding("duty_cycle", f"coil on {s.duty:.1%} of the last {rig.limits.duty_window_s:g} s, "
                       f"{(s.duty - limit) * 100:.1f} points over the {limit:.0%} limit",
                       {"duty": s.duty, "limit": limit, "window_s": rig.limits.duty_window_s})
    return None


def heartbeat_lost(s: Sample, rig: RigConfig) -> Finding | None:
    timeout = rig.supervisor.heartbeat_timeout_s
    if s.board_silent_s is not None and s.board_silent_s > timeout:
        return Finding("heartbeat_lost", f"the board has not answered for {s.board_silent_s:.2f} s "
                       f"({s.board_silent_s - timeout:.2f} s beyond the {timeout:g} s heartbeat timeout)",
                       {"silent_s": s.board_silent_s, "timeout_s": timeout})
    return None


def low_battery(s: Sample, rig: RigConfig) -> Finding | None:
    floor = rig.supervisor.min_battery_v
    if floor > 0 and s.battery_v is not None and s.battery_v < floor:
        return Finding("low_battery", f"battery at {s.battery_v:.2f} V, {floor - s.battery_v:.2f} V below the "
                       f"{floor:g} V minimum", {"battery_v": s.battery_v, "limit_v": floor})
    return None


def low_disk_space(s: Sample, rig: RigConfig) -> Finding | None:
    floor = rig.supervisor.min_disk_free_mb
    if s.disk_free_mb is not None and s.disk_free_mb < floor:
        return Finding("low_disk_space", f"{s.disk_free_mb:.1f} MB free beside the store, {floor - s.disk_free_mb:.1f} MB "
                       f"below the {floor:g} MB minimum", {"disk_free_mb": s.disk_free_mb, "limit_mb": floor})
    return None


def _known(values: dict[str, float | None]) -> dict[str, float]:
    return {k: v for k, v in values.items() if v is not None}


Check = Callable[[Sample, RigConfig], "Finding | None"]
CHECKS: tuple[Check, ...] = (
    over_current, open_coil, supply_compliance, shorted_coil, readback_mismatch, measured_over_temperature,
    predicted_over_temperature, temperature_disagreement, duty_cycle, heartbeat_lost, low_battery, low_disk_space,
)
CHECK_NAMES = tuple(c.__name__ for c in CHECKS) + ("store_failure",)


def first_finding(sample: Sample, rig: RigConfig, skip: tuple[str, ...] = ()) -> Finding | None:
    """Run the checks in order; the first finding, with any others named in its reason."""
    found = [f for check in CHECKS if check.__name__ not in skip for f in (check(sample, rig),) if f is not None]
    if not found:
        return None
    first = found[0]
    if len(found) > 1:
        return Finding(first.check, first.reason + " (also: " + ", ".join(f.check for f in found[1:]) + ")",
                       first.values)
    return first
