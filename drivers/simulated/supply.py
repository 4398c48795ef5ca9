"""Simulated polarising supply: drives the shared instrument; readback shows the coil's R(T)."""

from __future__ import annotations

from typing import Any

from controller.errors import DriverError
from drivers.simulated.instrument import SimulatedInstrument

READBACK_NOISE_FRACTION = 1e-4


class SimulatedSupply:
    def __init__(self, instrument: SimulatedInstrument) -> None:
        self.inst = instrument

    def describe(self) -> dict[str, Any]:
        return {"driver": "simulated", "role": "supply"}

    def set_current(self, current_a: float) -> None:
        if self.inst.faults.supply_dead:
            raise DriverError("simulated supply: no reply (injected fault)")
        self.inst.set_current(current_a)

    def read_current(self) -> float:
        self.inst.advance()
        i = self.inst.current_a if self.inst.output_on else 0.0
        return i * (1.0 + READBACK_NOISE_FRACTION * self.inst.rng.standard_normal())

    def read_voltage(self) -> float:
        """V = I R(T) in steady state (the resistance method reads coil temperature from it)."""
        self.inst.advance()
        i = self.inst.current_a if self.inst.output_on else 0.0
        return i * self.inst.coil_resistance_ohm() * (1.0 + READBACK_NOISE_FRACTION * self.inst.rng.standard_normal())

    def output_off(self) -> None:
        """Idempotent; never raises for 'already off'."""
        self.inst.switch_off()
