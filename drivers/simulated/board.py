"""Simulated switch/sensor board: coil path and sensors (thermistor, current sense, battery).

Faults: a silent board (heartbeat lost) raises DriverError on every call; a sagging battery
reads lower and lower; a loose thermistor reads an offset.
"""

from __future__ import annotations

from typing import Any

from controller.errors import DriverError
from drivers.simulated.instrument import SimulatedInstrument

PATHS = ("idle", "polarise", "transmit", "receive")


class SimulatedBoard:
    def __init__(self, instrument: SimulatedInstrument, battery_v: float = 12.6) -> None:
        self.inst = instrument
        self.battery_v = battery_v
        self.heartbeat = 0

    def describe(self) -> dict[str, Any]:
        return {"driver": "simulated", "role": "board", "paths": list(PATHS)}

    def _answer(self) -> None:
        if self.inst.faults.active("board_silent", self.inst.clock.now()):
            raise DriverError("simulated board: no reply within the timeout (injected fault)")
        self.heartbeat += 1

    def set_path(self, path: str) -> None:
        if path not in PATHS:
            raise ValueError(f"unknown coil path {path!r}; allowed: {', '.join(PATHS)}")
        self._answer()
        if path == "idle":
            self.inst.switch_off()
        self.inst.path = path

    def read_sensors(self) -> dict[str, float]:
        self._answer()
        inst = self.inst
        inst.advance()
        now = inst.clock.now()
        faults = inst.faults
        offset = faults.thermistor_offset_k if faults.active("thermistor_offset", now) else 0.0
        return {
            "coil_temperature_c": inst.coil_temperature_c + offset + 0.05 * inst.rng.standard_normal(),
            "current_sense_a": inst.coil_current_a(now),
            "battery_v": self.battery_v - faults.battery_sag_v_per_s * faults.since_s("battery_sag", now),
            "heartbeat": float(self.heartbeat),
        }
