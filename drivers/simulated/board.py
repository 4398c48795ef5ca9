"""Simulated switch/sensor board: coil path and sensors (thermistor, current sense, battery)."""

from __future__ import annotations

from typing import Any

from drivers.simulated.instrument import SimulatedInstrument

PATHS = ("idle", "polarise", "transmit", "receive")


class SimulatedBoard:
    def __init__(self, instrument: SimulatedInstrument, battery_v: float = 12.6) -> None:
        self.inst = instrument
        self.battery_v = battery_v

    def describe(self) -> dict[str, Any]:
        return {"driver": "simulated", "role": "board", "paths": list(PATHS)}

    def set_path(self, path: str) -> None:
        if path not in PATHS:
            raise ValueError(f"unknown coil path {path!r}; allowed: {', '.join(PATHS)}")
        if path == "idle":
            self.inst.switch_off()
        self.inst.path = path

    def read_sensors(self) -> dict[str, float]:
        self.inst.advance()
        return {
            "coil_temperature_c": self.inst.coil_temperature_c + 0.05 * self.inst.rng.standard_normal(),
            "current_sense_a": self.inst.current_a if self.inst.output_on else 0.0,
            "battery_v": self.battery_v,
        }
