"""An emulated SCPI current supply driving a coil: R(T), L and a compliance voltage.

The coil obeys L di/dt = V - R(T) i.  In constant-current operation the supply raises the
voltage up to its compliance to push the current to the setpoint, so the current rises as
i(t) = Vc/R + (i0 - Vc/R) exp(-t R/L) until it reaches the setpoint (or settles at Vc/R
when the compliance is too low); lowering the setpoint lets it fall as i0 exp(-t R/L)
(a one-quadrant supply cannot drive it negative).  The winding heats as
C dT/dt = i^2 R(T) - (T - Ta)/Rth with R(T) = R20 (1 + 0.00393 (T - 20)) (copper, IEC 60028).

    python -m drivers.emulators.scpi_supply --port 0 --resistance-ohm 4.4 --inductance-h 0.03
"""

from __future__ import annotations

import math
import time
from typing import Any

from drivers.emulators.scpi_server import Instrument, serve_main

COPPER_ALPHA_PER_K = 0.00393


class CoilSupply(Instrument):
    """State and physics; times from time.monotonic()."""

    identity = "Kestrel Instruments,KI-CS60 (emulated),EMU0001,1.2"

    def __init__(self, resistance_ohm: float = 4.4, inductance_h: float = 0.03, max_current_a: float = 5.0,
                 max_voltage_v: float = 60.0, ambient_c: float = 20.0, heat_capacity_j_per_k: float = 250.0,
                 thermal_resistance_k_per_w: float = 4.0) -> None:
        super().__init__()
        self.r20_ohm = resistance_ohm
        self.inductance_h = inductance_h
        self.max_current_a = max_current_a
        self.max_voltage_v = max_voltage_v
        self.ambient_c = ambient_c
        self.heat_capacity = heat_capacity_j_per_k
        self.thermal_resistance = thermal_resistance_k_per_w
        self.reset()

    def reset(self) -> None:
        self.output_on = False
        self.setpoint_a = 0.0
        self.compliance_v = 1.0
        self.current_a = 0.0
        self.temperature_c = getattr(self, "temperature_c", self.ambient_c)
        self._at = time.monotonic()

    def resistance_ohm(self) -> float:
        return self.r20_ohm * (1.0 + COPPER_ALPHA_PER_K * (self.temperature_c - 20.0))

    def advance(self, now: float | None = None) -> None:
        """Carry current and temperature forward to now, in sub-steps of at most L/R / 20."""
        now = time.monotonic() if now is None else now
        remaining = now - self._at
        self._at = now
        while remaining > 0:
            r = self.resistance_ohm()
            tau = self.inductance_h / r
            dt = min(remaining, tau / 20.0, 0.5)
            remaining -= dt
            decay = math.exp(-dt / tau)
            if not self.output_on:
                self.current_a = 0.0
            elif self.current_a < self.setpoint_a:
                target = min(self.setpoint_a, self.compliance_v / r)
                driven = self.compliance_v / r + (self.current_a - self.compliance_v / r) * decay
                self.current_a = min(driven, target) if self.current_a <= target else self.current_a * decay
            else:
                self.current_a = max(self.setpoint_a, self.current_a * decay)
            heat_w = self.current_a**2 * r
            self.temperature_c += dt * (heat_w - (self.temperature_c - self.ambient_c) / self.thermal_resistance) \
                / self.heat_capacity

    def terminal_voltage_v(self) -> float:
        """Compliance while the current is still being driven up, else the resistive drop."""
        if not self.output_on:
            return 0.0
        r = self.resistance_ohm()
        if self.current_a < min(self.setpoint_a, self.compliance_v / r) - 1e-6:
            return self.compliance_v
        return self.current_a * r

    def _number(self, argument: str, low: float, high: float) -> float | None:
        try:
            value = float(argument)
        except ValueError:
            self.push_error(-104, "Data type error")
            return None
        if not low <= value <= high:
            self.push_error(-222, "Data out of range")
            return None
        return value

    def handle(self, header: str, argument: str) -> Any:
        self.advance()
        h = header.removeprefix("SOUR:")
        if h == "CURR":
            value = self._number(argument, 0.0, self.max_current_a)
            if value is not None:
                self.setpoint_a = value
            return None
        if h == "VOLT":
            value = self._number(argument, 0.0, self.max_voltage_v)
            if value is not None:
                self.compliance_v = value
            return None
        if h == "CURR?":
            return f"{self.setpoint_a:.4f}"
        if h == "VOLT?":
            return f"{self.compliance_v:.4f}"
        if h == "OUTP":
            if argument.upper() in ("ON", "1"):
                self.output_on = True
            elif argument.upper() in ("OFF", "0"):
                self.output_on = False
                self.current_a = 0.0
            else:
                self.push_error(-224, "Illegal parameter value")
            return None
        if h == "OUTP?":
            return "1" if self.output_on else "0"
        if h == "MEAS:CURR?":
            return "9.9E37" if self.fault == "overrange" else f"{self.current_a:.5f}"
        if h == "MEAS:VOLT?":
            return f"{self.terminal_voltage_v():.4f}"
        self.push_error(-113, "Undefined header")
        return None


def _arguments(parser: Any) -> None:
    parser.add_argument("--resistance-ohm", type=float, default=4.4, help="coil resistance at 20 C")
    parser.add_argument("--inductance-h", type=float, default=0.03)
    parser.add_argument("--max-current-a", type=float, default=5.0)
    parser.add_argument("--max-voltage-v", type=float, default=60.0)
    parser.add_argument("--ambient-c", type=float, default=20.0)


def _make(args: Any) -> CoilSupply:
    return CoilSupply(args.resistance_ohm, args.inductance_h, args.max_current_a, args.max_voltage_v, args.ambient_c)


if __name__ == "__main__":
    raise SystemExit(serve_main(_make, _arguments, "Emulated SCPI current supply with a coil load."))
