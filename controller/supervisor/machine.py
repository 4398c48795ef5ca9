"""The supervisor: a small latched state machine fed by the pure checks of supervisor.checks.

States: ARMED (watching) and TRIPPED (latched).  ARMED -> TRIPPED on the first finding at a
control-period sample (or a store failure); TRIPPED -> ARMED only through
`TripLatch.acknowledge` by an operator, never by code that runs a sequence or a schedule.

The engine drives it (controller/engine.py):

* `watch(rig)` wraps the supply so that every setpoint is seen with its time;
* `begin(steps, rig)` before a run: refuses when a trip is latched, reads the coil's start
  temperature and refuses when the plan would overheat a coil that is already warm;
* `read(rig)` and `evaluate(readings)` every control period; on a finding the engine makes
  the rig safe at once and calls `trip(...)`, which latches and persists it.

Between samples the supervisor runs the rig's thermal model on the commanded current, each
pulse lasting as planned (the k-th pulse of the plan for the k-th switch-on), so it knows
both the temperature now and the temperature the present pulse will end at.
"""

from __future__ import annotations

import dataclasses
import logging
import math
from typing import Any, Sequence

from controller.checks import planning_limit_c
from controller.clock import Clock
from controller.config.schema import RigConfig
from controller.cooling import shortest_wait_s
from controller.errors import PrecessError
from controller.records import InterlockTripped
from controller.rigmodel import coil_thermal_model
from controller.supervisor.checks import Finding, Sample, first_finding
from controller.supervisor.host import HostMonitor, LocalHost
from controller.supervisor.latch import TripLatch, TripLatchedError
from controller.supervisor.measured import cold_resistance, expected_resistance_ohm, supply_temperature_c
from controller.thermal_plan import CurrentStep, predict_temperature

log = logging.getLogger(__name__)
ARMED = "armed"
TRIPPED = "tripped"
THERMISTOR_KEY = "coil_temperature_c"  # what a board reports from its coil thermistor


class InterlockTrip(Exception):
    """Raised in the engine's run loop after a trip; carries the record."""

    def __init__(self, record: InterlockTripped) -> None:
        super().__init__(f"{record.check}: {record.reason}")
        self.record = record


class CoilTooWarmError(PrecessError):
    """The coil is already warm: the plan would exceed the temperature limit from here."""

    exit_code = 5


class CommandedSupply:
    """A CurrentSupply that tells the supervisor every setpoint before passing it on."""

    def __init__(self, supply: Any, supervisor: "Supervisor") -> None:
        self.supply = supply
        self.supervisor = supervisor

    def set_current(self, current_a: float) -> None:
        self.supervisor.command(current_a)
        self.supply.set_current(current_a)

    def read_current(self) -> float:
        return self.supply.read_current()

    def read_voltage(self) -> float:
        return self.supply.read_voltage()

    def output_off(self) -> None:
        self.supply.output_off()
        self.supervisor.command(0.0)

    def describe(self) -> dict[str, Any]:
        return self.supply.describe()


class Supervisor:
    """Watches one rig during runs; see the module docstring."""

    def __init__(self, rig: RigConfig, clock: Clock, latch: TripLatch | None = None,
                 host: HostMonitor | None = None, store: Any = None, skip: Sequence[str] = ()) -> None:
        self.rig = rig
        self.clock = clock
        self.latch = latch
        self.host = host
        self.store = store
        self.skip = tuple(skip)
        self.model = coil_thermal_model(rig.coil)
        self.r0_ohm, self.t0_c = cold_resistance(rig)
        self.tripped: InterlockTripped | None = None
        self.has_board = False
        self._last_disk_free_mb: float | None = None
        self._reset(clock.now(), rig.coil.ambient_c, ())

    @property
    def state(self) -> str:
        return TRIPPED if self.tripped is not None else ARMED

    def _reset(self, now: float, start_c: float, plan: Sequence[tuple[float, float]]) -> None:
        self._thermal = self.model.initial_state(start_c)
        self._thermal_at = now
        self._commanded_a = 0.0
        self._command_at = -math.inf
        self._pulse_end = now
        self._on: list[list[float]] = []  # [start, planned or actual end] of coil-on intervals
        self._plan = list(plan)
        self._pulse_index = 0
        self._board_ok_at = now

    # ---- set-up ----------------------------------------------------------------------------
    def watch(self, rig: Any) -> Any:
        """The rig with its supply wrapped (a copy; the caller's rig is not changed)."""
        self.has_board = rig.board is not None
        if self.host is None:
            self.host = getattr(rig, "host", None) or LocalHost()
        return dataclasses.replace(rig, supply=CommandedSupply(rig.supply, self))

    def begin(self, steps: Sequence[CurrentStep], rig: Any) -> None:
        """Arm for a run of the given current steps; raise instead if it may not start."""
        if self.tripped is not None:
            raise TripLatchedError(f"rig {self.rig.name!r} tripped ({self.tripped.check}: {self.tripped.reason}); "
                                   "acknowledge it with `precess ack` first")
        if self.latch is not None:
            self.latch.require_clear()
        now = self.clock.now()
        start_c, source = self.rig.coil.ambient_c, "ambient"
        if rig.board is not None:
            try:
                thermistor_c = rig.board.read_sensors().get(THERMISTOR_KEY)
            except Exception as exc:  # noqa: BLE001 - a silent board is caught by the heartbeat check
                log.warning("board did not answer before the run: %s", exc)
                thermistor_c = None
            if thermistor_c is not None and thermistor_c > start_c:
                start_c, source = thermistor_c, "thermistor"
        self._reset(now, start_c, [(s.current_a, s.duration_s) for s in steps if s.current_a > 0])
        self._refuse_if_too_warm(steps, start_c, source)

    def _refuse_if_too_warm(self, steps: Sequence[CurrentStep], start_c: float, source: str) -> None:
        limit = planning_limit_c(self.rig)
        if not steps or start_c <= self.rig.coil.ambient_c + 0.5:
            return
        peak = predict_temperature(self.model, steps, start_state=self._thermal).peak_c
        if peak <= limit:
            return
        wait_s = shortest_wait_s(lambda t: predict_temperature(
            self.model, steps, start_state=self.model.advance(self._thermal, 0.0, t)).peak_c <= limit)
        raise CoilTooWarmError(f"the coil is at {start_c:.1f} C ({source}); this run would take it to {peak:.1f} C, "
                               f"{peak - limit:.1f} K over the {limit:g} C planning limit; let it cool about "
                               f"{wait_s / 60:.1f} min first")

    # ---- commands (from CommandedSupply) ---------------------------------------------------
    def command(self, current_a: float) -> None:
        now = self.clock.now()
        self._advance_model(now)
        if current_a > 0 and self._commanded_a <= 0:
            if self._pulse_index < len(self._plan):
                duration = self._plan[self._pulse_index][1]
            else:
                duration = self.rig.limits.max_polarise_s  # unplanned: assume the longest allowed
            self._pulse_index += 1
            self._pulse_end = now + duration
            self._on.append([now, self._pulse_end])
        elif current_a <= 0 and self._commanded_a > 0:
            self._pulse_end = min(self._pulse_end, now)
            if self._on:
                self._on[-1][1] = min(self._on[-1][1], now)
        self._commanded_a = max(0.0, current_a)
        self._command_at = now

    def _advance_model(self, now: float) -> None:
        t = self._thermal_at
        if self._commanded_a > 0 and self._pulse_end > t:
            on_until = min(now, self._pulse_end)
            self._thermal = self.model.advance(self._thermal, self._commanded_a, on_until - t)
            t = on_until
        self._thermal = self.model.advance(self._thermal, 0.0, now - t)
        self._thermal_at = now

    def _duty(self, now: float) -> float:
        window = self.rig.limits.duty_window_s
        self._on = [iv for iv in self._on if iv[1] > now - window]
        on_s = sum(max(0.0, min(end, now) - max(start, now - window)) for start, end in self._on)
        return on_s / window

    # ---- every control period ---------------------------------------------------------------
    def read(self, rig: Any) -> dict[str, float]:
        """Supply and board readings; a board that does not answer is noted, not raised."""
        readings = {"current_a": rig.supply.read_current(), "voltage_v": rig.supply.read_voltage()}
        now = self.clock.now()
        if rig.board is not None:
            try:
                readings.update(rig.board.read_sensors())
                self._board_ok_at = now
            except Exception as exc:  # noqa: BLE001 - silence is what the heartbeat check judges
                log.warning("board did not answer: %s", exc)
        if self.host is not None:
            try:
                readings.update(self.host.readings(self.store))
            except OSError as exc:
                log.warning("host readings failed: %s", exc)
        return readings

    def evaluate(self, readings: dict[str, float]) -> tuple[dict[str, float], Finding | None]:
        """Derived values (model and resistance temperatures, duty...) and the first finding."""
        now = self.clock.now()
        self._advance_model(now)
        sup = self.rig.supervisor
        settled = now - self._command_at >= sup.settle_s - 1e-9
        current, voltage = float(readings["current_a"]), float(readings["voltage_v"])
        resistance_c = (supply_temperature_c(voltage, current, self.r0_ohm, self.t0_c, sup.sense_current_a)
                        if settled and self._commanded_a > 0 else None)
        model_c = self.model.winding_c(self._thermal)
        predicted_c = model_c
        if self._commanded_a > 0 and self._pulse_end > now:
            predicted_c = self.model.winding_c(self.model.advance(self._thermal, self._commanded_a, self._pulse_end - now))
        sample = Sample(
            at_s=now, commanded_current_a=self._commanded_a, settled=settled, current_a=current, voltage_v=voltage,
            expected_resistance_ohm=expected_resistance_ohm(model_c, self.r0_ohm, self.t0_c),
            resistance_c=resistance_c, thermistor_c=readings.get(THERMISTOR_KEY), model_c=model_c,
            predicted_c=predicted_c, duty=self._duty(now),
            board_silent_s=(now - self._board_ok_at) if self.has_board else None,
            battery_v=readings.get("battery_v"), disk_free_mb=readings.get("disk_free_mb"))
        self._last_disk_free_mb = sample.disk_free_mb
        derived = {"model_temperature_c": model_c, "predicted_temperature_c": predicted_c, "duty_cycle": sample.duty,
                   "commanded_current_a": self._commanded_a}
        if resistance_c is not None:
            derived["resistance_temperature_c"] = resistance_c
        if sample.board_silent_s is not None:
            derived["board_silent_s"] = sample.board_silent_s
        return derived, first_finding(sample, self.rig, self.skip)

    # ---- trips -------------------------------------------------------------------------------
    def trip(self, run_id: str, finding: Finding, at_s: float, safe_state_failures: Sequence[str] = ()) -> InterlockTripped:
        """Latch a finding (in memory and in the latch file) and return its record."""
        reason = finding.reason
        if safe_state_failures:
            reason += "; making safe failed for: " + "; ".join(safe_state_failures)
        record = InterlockTripped(run_id=run_id, at_s=at_s, check=finding.check, reason=reason,
                                  values=dict(finding.values))
        if self.tripped is None:
            self.tripped = record
        if self.latch is not None:
            try:
                self.latch.latch(record)
            except OSError as exc:
                log.error("the trip could not be written to %s (%s); it is latched in this process only",
                          self.latch.path, exc)
        return record

    def store_failure(self, run_id: str, message: str, at_s: float, shots_stored: int,
                      safe_state_failures: Sequence[str] = ()) -> InterlockTripped:
        values = {"shots_stored": float(shots_stored)} | (
            {"disk_free_mb": self._last_disk_free_mb} if self._last_disk_free_mb is not None else {})
        return self.trip(run_id, Finding("store_failure", message, values), at_s, safe_state_failures)
