"""The coil as a circuit: stored energy, switch-off through a clamp, tuning to the Larmor frequency.

* Stored (flyback) energy E = 1/2 L I^2 [any circuits text].
* Switch-off through a constant-voltage clamp Vc: L di/dt = -(Vc + R i), so the current falls
  from I to zero in t = (L/R) ln(1 + R I / Vc), which is L I / Vc when R I << Vc
  [calc from the circuit equation; REFERENCE.md "Coil circuit"].  As i reaches zero,
  di/dt = -Vc / L.
* Tuning: C = 1 / ((2 pi f)^2 L); the coil's loss R sets Q = 2 pi f L / R and the -3 dB
  bandwidth f / Q = R / (2 pi L) [any circuits text].
"""

from __future__ import annotations

import math


def flyback_energy_j(inductance_h: float, current_a: float) -> float:
    """Energy stored in the coil, E = 1/2 L I^2."""
    return 0.5 * inductance_h * current_a**2


def clamp_switch_off_time_s(inductance_h: float, resistance_ohm: float, current_a: float,
                            clamp_voltage_v: float) -> float:
    """Time for the current to fall from I to 0 through a clamp: t = (L/R) ln(1 + R I / Vc)."""
    if resistance_ohm <= 0.0:
        return inductance_h * current_a / clamp_voltage_v
    return inductance_h / resistance_ohm * math.log1p(resistance_ohm * current_a / clamp_voltage_v)


def clamp_final_current_slope_a_per_s(inductance_h: float, clamp_voltage_v: float) -> float:
    """|di/dt| = Vc / L as the current reaches zero (the slowest part of a clamped switch-off)."""
    return clamp_voltage_v / inductance_h


def tuning_capacitance_f(inductance_h: float, frequency_hz: float) -> float:
    """Capacitance that resonates with L at f: C = 1 / ((2 pi f)^2 L)."""
    return 1.0 / ((2.0 * math.pi * frequency_hz) ** 2 * inductance_h)


def quality_factor(inductance_h: float, resistance_ohm: float, frequency_hz: float) -> float:
    """Q = 2 pi f L / R of the coil (copper loss only)."""
    return 2.0 * math.pi * frequency_hz * inductance_h / resistance_ohm


def resonance_bandwidth_hz(inductance_h: float, resistance_ohm: float) -> float:
    """-3 dB full width of the tuned coil, f / Q = R / (2 pi L)."""
    return resistance_ohm / (2.0 * math.pi * inductance_h)
