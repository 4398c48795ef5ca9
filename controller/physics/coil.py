"""Solenoid coil engineering: wire, resistance, field per amp, inductance, L/R.

Formulas (REFERENCE.md, "Coil engineering"):

* AWG diameter d = 0.127 mm * 92**((36 - n) / 39)                 [ASTM B258]
* copper resistivity rho_20 = 1/58 ohm mm^2/m (100 % IACS)          [IEC 60028]
* R(T) = R_20 (1 + alpha (T - 20 C)), alpha = 0.00393 /K             [handbook value]
* finite solenoid on-axis field
  B(z) = mu0 N I / (2 l) [ (z + l/2)/sqrt((z + l/2)^2 + a^2) - (z - l/2)/sqrt((z - l/2)^2 + a^2) ]
* Wheeler (1928), inches and microhenry: single layer L = a^2 N^2 / (9 a + 10 b);
  multilayer L = 0.8 a^2 N^2 / (6 a + 9 b + 10 c).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from controller.physics.constants import MU0_T_M_PER_A

COPPER_RESISTIVITY_20C_OHM_M: float = 1.0 / 58.0 * 1e-6  # 1/58 ohm mm^2/m -> ohm m
COPPER_ALPHA_PER_K: float = 0.00393
REFERENCE_TEMPERATURE_C: float = 20.0
COPPER_DENSITY_KG_PER_M3: float = 8960.0
COPPER_SPECIFIC_HEAT_J_PER_KG_K: float = 385.0
METRES_PER_INCH: float = 0.0254


def awg_diameter_m(gauge: int) -> float:
    """Bare diameter of an AWG wire in metres: d = 0.127 mm * 92**((36 - n)/39) (ASTM B258)."""
    return 0.127e-3 * 92.0 ** ((36 - gauge) / 39.0)


def wire_area_m2(diameter_m: float) -> float:
    """Cross-section pi d^2 / 4 of a round wire in m^2."""
    return math.pi * diameter_m**2 / 4.0


def copper_resistance_ohm(length_m: float, diameter_m: float, temperature_c: float = 20.0) -> float:
    """R(T) = rho_20 l / A * (1 + alpha (T - 20 C)) for annealed copper (IEC 60028)."""
    r20 = COPPER_RESISTIVITY_20C_OHM_M * length_m / wire_area_m2(diameter_m)
    return r20 * (1.0 + COPPER_ALPHA_PER_K * (temperature_c - REFERENCE_TEMPERATURE_C))


def temperature_from_resistance_c(resistance_ohm: float, resistance_20c_ohm: float) -> float:
    """Invert R(T) = R_20 (1 + alpha (T - 20)): T = 20 + (R/R_20 - 1)/alpha (resistance method)."""
    return REFERENCE_TEMPERATURE_C + (resistance_ohm / resistance_20c_ohm - 1.0) / COPPER_ALPHA_PER_K


def solenoid_axial_field_per_amp_t(turns: int, radius_m: float, length_m: float, z_m: float = 0.0) -> float:
    """On-axis field per amp of a finite thin solenoid at distance z from its centre (T/A).

    B(z)/I = mu0 N / (2 l) [ (z + l/2)/sqrt((z + l/2)^2 + a^2) - (z - l/2)/sqrt((z - l/2)^2 + a^2) ]
    At the centre this is mu0 N / sqrt(l^2 + 4 a^2).
    """
    zp = z_m + length_m / 2.0
    zm = z_m - length_m / 2.0
    return (
        MU0_T_M_PER_A * turns / (2.0 * length_m)
        * (zp / math.hypot(zp, radius_m) - zm / math.hypot(zm, radius_m))
    )


def wheeler_inductance_h(turns: int, radius_m: float, length_m: float, build_m: float = 0.0) -> float:
    """Wheeler (1928) inductance of a solenoid in henry.

    radius_m is the mean winding radius a, length_m the winding length b and build_m the
    radial depth c of the winding.  Single layer (c = 0): L[uH] = a^2 N^2 / (9a + 10b);
    multilayer: L[uH] = 0.8 a^2 N^2 / (6a + 9b + 10c), with a, b, c in inches.
    """
    a = radius_m / METRES_PER_INCH
    b = length_m / METRES_PER_INCH
    c = build_m / METRES_PER_INCH
    if build_m <= 0.0:
        micro_h = a**2 * turns**2 / (9.0 * a + 10.0 * b)
    else:
        micro_h = 0.8 * a**2 * turns**2 / (6.0 * a + 9.0 * b + 10.0 * c)
    return micro_h * 1e-6


@dataclass(frozen=True)
class CoilModel:
    """A polarising/receive solenoid derived from its winding.

    Attributes are the winding (turns, mean radius, length, wire gauge, build) and the derived
    electrical quantities at 20 C.
    """

    turns: int
    radius_m: float
    length_m: float
    wire_awg: int
    build_m: float = 0.0

    @property
    def wire_diameter_m(self) -> float:
        return awg_diameter_m(self.wire_awg)

    @property
    def wire_length_m(self) -> float:
        """Wire length 2 pi a N (mean turn length times turns)."""
        return 2.0 * math.pi * self.radius_m * self.turns

    @property
    def resistance_20c_ohm(self) -> float:
        return copper_resistance_ohm(self.wire_length_m, self.wire_diameter_m, 20.0)

    def resistance_ohm(self, temperature_c: float) -> float:
        return copper_resistance_ohm(self.wire_length_m, self.wire_diameter_m, temperature_c)

    @property
    def field_per_amp_t(self) -> float:
        """Centre field per amp mu0 N / sqrt(l^2 + 4 a^2), T/A."""
        return solenoid_axial_field_per_amp_t(self.turns, self.radius_m, self.length_m)

    @property
    def inductance_h(self) -> float:
        return wheeler_inductance_h(self.turns, self.radius_m, self.length_m, self.build_m)

    @property
    def copper_mass_kg(self) -> float:
        return COPPER_DENSITY_KG_PER_M3 * self.wire_length_m * wire_area_m2(self.wire_diameter_m)

    @property
    def heat_capacity_j_per_k(self) -> float:
        """Heat capacity of the copper alone, m c_p (the winding's lower bound)."""
        return self.copper_mass_kg * COPPER_SPECIFIC_HEAT_J_PER_KG_K

    def time_constant_s(self, temperature_c: float = 20.0) -> float:
        """tau = L / R."""
        return self.inductance_h / self.resistance_ohm(temperature_c)
