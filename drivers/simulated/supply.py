"""Simulated polarising supply: drives the shared instrument; readback shows the coil's R(T).

Faults (drivers.simulated.instrument.Faults) change what it does and reads back: an open
coil reads no current at the voltage limit, a short reads the set current at almost no
voltage, a stuck supply ignores setpoints and output_off, an overshoot delivers more than
asked, a failing joint or a hot coil can push it to its voltage limit (compliance).  A lost
supply (unplugged, powered down) raises DriverError on every call, output_off included: the
host can no longer command it (on a real rig the board's relay keeps the coil dead).
"""

from __future__ import annotations

from typing import Any

from controller.errors import DriverError
from drivers.simulated.instrument import SHORT_RESISTANCE_OHM, SimulatedInstrument

READBACK_NOISE_FRACTION = 1e-4


class SimulatedSupply:
    def __init__(self, instrument: SimulatedInstrument) -> None:
        self.inst = instrument

    def describe(self) -> dict[str, Any]:
        return {"driver": "simulated", "role": "supply", "compliance_v": self.inst.compliance_v}

    def _stuck(self) -> bool:
        return self.inst.faults.active("stuck_supply", self.inst.clock.now())

    def _answer(self) -> None:
        if self.inst.faults.active("supply_lost", self.inst.clock.now()):
            raise DriverError("simulated supply: no reply, the device is gone (injected fault)")

    def set_current(self, current_a: float) -> None:
        self._answer()
        if self.inst.faults.supply_dead:
            raise DriverError("simulated supply: no reply (injected fault)")
        if not self._stuck():
            self.inst.set_current(current_a)

    def _noisy(self, value: float) -> float:
        return value * (1.0 + READBACK_NOISE_FRACTION * self.inst.rng.standard_normal())

    def _readback(self) -> tuple[float, float]:
        """(current, voltage) at the output now, before readback noise."""
        inst = self.inst
        inst.advance()
        now = inst.clock.now()
        if not inst.supply_live:
            return 0.0, 0.0
        if inst.faults.active("shorted_coil", now):
            return inst.current_a, inst.current_a * SHORT_RESISTANCE_OHM
        if inst.output_on and not inst.faults.active("open_coil", now):
            current = inst.coil_current_a(now)
            return current, current * inst.circuit_resistance_ohm(now)
        return 0.0, inst.compliance_v  # no load: the output sits at its voltage limit

    def read_current(self) -> float:
        self._answer()
        return self._noisy(self._readback()[0])

    def read_voltage(self) -> float:
        """V = I R(T) while the coil carries current (the resistance method reads coil temperature from it)."""
        self._answer()
        return self._noisy(self._readback()[1])

    def output_off(self) -> None:
        """Idempotent; never raises for 'already off'.  A stuck supply silently stays on; a lost one raises."""
        self._answer()
        if self._stuck():
            return
        self.inst.supply_live = False
        self.inst.switch_off()
