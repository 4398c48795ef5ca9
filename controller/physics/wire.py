"""Copper winding wire: sizes, resistance and its temperature dependence.

* AWG bare diameter d = 0.127 mm * 92**((36 - n) / 39)                     [ASTM B258]
* annealed copper resistivity rho_20 = 1/58 ohm mm^2/m (100 % IACS)         [IEC 60028]
* R(T) = R_20 (1 + alpha (T - 20 C)), alpha = 0.00393 /K                    [handbook value, from memory]
* metric wire: nominal bare diameters of the R20 preferred-number series used for enamelled
  round winding wire (IEC 60317-0-1) [from memory]; resistance from the same resistivity.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

COPPER_RESISTIVITY_20C_OHM_M: float = 1.0 / 58.0 * 1e-6  # 1/58 ohm mm^2/m -> ohm m
COPPER_ALPHA_PER_K: float = 0.00393
REFERENCE_TEMPERATURE_C: float = 20.0
COPPER_DENSITY_KG_PER_M3: float = 8960.0
COPPER_SPECIFIC_HEAT_J_PER_KG_K: float = 385.0

#: AWG sizes listed by `precess plan wires` (the range used for hand-wound coils).
AWG_TABLE_GAUGES: tuple[int, ...] = tuple(range(10, 37))
#: Nominal bare diameters (mm) of metric enamelled winding wire, R20 series [from memory].
METRIC_DIAMETERS_MM: tuple[float, ...] = (
    0.20, 0.224, 0.25, 0.28, 0.315, 0.355, 0.40, 0.45, 0.50, 0.56, 0.63, 0.71, 0.80, 0.90,
    1.00, 1.12, 1.25, 1.40, 1.60, 1.80, 2.00, 2.24, 2.50,
)


def awg_diameter_m(gauge: int) -> float:
    """Bare diameter of an AWG wire in metres: d = 0.127 mm * 92**((36 - n)/39) (ASTM B258).

    Gauges 0 to 40 are accepted (0 is AWG 1/0); larger sizes use the 0000 notation, not here.
    """
    return 0.127e-3 * 92.0 ** ((36 - gauge) / 39.0)


def wire_area_m2(diameter_m: float) -> float:
    """Cross-section pi d^2 / 4 of a round wire in m^2."""
    return math.pi * diameter_m**2 / 4.0


def resistance_factor(temperature_c: float) -> float:
    """R(T)/R_20 = 1 + alpha (T - 20 C) for copper."""
    return 1.0 + COPPER_ALPHA_PER_K * (temperature_c - REFERENCE_TEMPERATURE_C)


def copper_resistance_ohm(length_m: float, diameter_m: float, temperature_c: float = 20.0) -> float:
    """R(T) = rho_20 l / A * (1 + alpha (T - 20 C)) for annealed copper (IEC 60028)."""
    return COPPER_RESISTIVITY_20C_OHM_M * length_m / wire_area_m2(diameter_m) * resistance_factor(temperature_c)


def temperature_from_resistance_c(resistance_ohm: float, resistance_20c_ohm: float) -> float:
    """Invert R(T) = R_20 (1 + alpha (T - 20)): T = 20 + (R/R_20 - 1)/alpha (resistance method)."""
    return REFERENCE_TEMPERATURE_C + (resistance_ohm / resistance_20c_ohm - 1.0) / COPPER_ALPHA_PER_K


@dataclass(frozen=True)
class WireSize:
    """One row of a wire table: its name, bare diameter and resistance per length at 20 C."""

    name: str
    diameter_m: float

    @property
    def area_mm2(self) -> float:
        return wire_area_m2(self.diameter_m) * 1e6

    @property
    def ohm_per_km_20c(self) -> float:
        return copper_resistance_ohm(1000.0, self.diameter_m)

    @property
    def mass_g_per_m(self) -> float:
        return COPPER_DENSITY_KG_PER_M3 * wire_area_m2(self.diameter_m) * 1e3

    def as_dict(self) -> dict[str, float | str]:
        return {"wire": self.name, "diameter_mm": self.diameter_m * 1e3, "area_mm2": self.area_mm2,
                "ohm_per_km_20c": self.ohm_per_km_20c, "mass_g_per_m": self.mass_g_per_m}


def awg_size(gauge: int) -> WireSize:
    return WireSize(name=f"AWG {gauge}", diameter_m=awg_diameter_m(gauge))


def metric_size(diameter_mm: float) -> WireSize:
    return WireSize(name=f"{diameter_mm:g} mm", diameter_m=diameter_mm * 1e-3)


def awg_table() -> list[WireSize]:
    return [awg_size(g) for g in AWG_TABLE_GAUGES]


def metric_table() -> list[WireSize]:
    return [metric_size(d) for d in METRIC_DIAMETERS_MM]
