"""Solenoid coil engineering: winding geometry, resistance, field per amp, inductance, L/R.

The geometry is explicit (see CoilModel): ``radius_m`` is the *inner* radius of the winding
(the outer radius of the former), ``build_m`` its radial depth, so the mean turn radius is
radius_m + build_m / 2.  Formulas (REFERENCE.md, "Coil engineering"):

* thin solenoid (current sheet of radius a) on-axis field
  B(z)/I = mu0 N / (2 l) [ (z + l/2)/sqrt((z + l/2)^2 + a^2) - (z - l/2)/sqrt((z - l/2)^2 + a^2) ]
  [any electromagnetism text]; at the centre mu0 N / sqrt(l^2 + 4 a^2);
* thick solenoid (uniform current density between radii a1 and a2): the thin formula averaged
  over the radius, B(z)/I = mu0 N / (2 l (a2 - a1)) [ F(z + l/2) - F(z - l/2) ],
  F(u) = u ln((a2 + sqrt(a2^2 + u^2)) / (a1 + sqrt(a1^2 + u^2))) [calc: integral of the thin formula];
* Wheeler (1928), inches and microhenry, a the mean radius: single layer
  L = a^2 N^2 / (9 a + 10 b); multilayer L = 0.8 a^2 N^2 / (6 a + 9 b + 10 c)
  [Wheeler, Proc. IRE 16:1398 (1928)].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from controller.errors import InputError
from controller.physics.constants import MU0_T_M_PER_A
from controller.physics.wire import (  # noqa: F401 - re-exported for older imports
    COPPER_ALPHA_PER_K,
    COPPER_DENSITY_KG_PER_M3,
    COPPER_RESISTIVITY_20C_OHM_M,
    COPPER_SPECIFIC_HEAT_J_PER_KG_K,
    REFERENCE_TEMPERATURE_C,
    awg_diameter_m,
    copper_resistance_ohm,
    temperature_from_resistance_c,
    wire_area_m2,
)

METRES_PER_INCH: float = 0.0254


def solenoid_axial_field_per_amp_t(turns: int, radius_m: float, length_m: float, z_m=0.0):
    """On-axis field per amp of a thin finite solenoid (current sheet of radius a) at z from its centre, T/A.

    B(z)/I = mu0 N / (2 l) [ (z + l/2)/sqrt((z + l/2)^2 + a^2) - (z - l/2)/sqrt((z - l/2)^2 + a^2) ]
    At the centre this is mu0 N / sqrt(l^2 + 4 a^2).  z_m may be an array.
    """
    zp = np.add(z_m, length_m / 2.0)
    zm = np.subtract(z_m, length_m / 2.0)
    b = MU0_T_M_PER_A * turns / (2.0 * length_m) * (zp / np.hypot(zp, radius_m) - zm / np.hypot(zm, radius_m))
    return float(b) if np.ndim(b) == 0 else b


def thick_solenoid_axial_field_per_amp_t(turns: int, inner_radius_m: float, outer_radius_m: float,
                                         length_m: float, z_m=0.0):
    """On-axis field per amp of a solenoid with uniform current density between two radii, T/A.

    B(z)/I = mu0 N / (2 l (a2 - a1)) [ F(z + l/2) - F(z - l/2) ],
    F(u) = u ln((a2 + sqrt(a2^2 + u^2)) / (a1 + sqrt(a1^2 + u^2))),
    the thin-solenoid formula averaged over a1 <= a <= a2.  Falls back to the thin formula at
    the mean radius when the build is negligible.  z_m may be an array.
    """
    a1, a2 = inner_radius_m, outer_radius_m
    if a2 - a1 <= 1e-9 * a2:
        return solenoid_axial_field_per_amp_t(turns, 0.5 * (a1 + a2), length_m, z_m)

    def f(u):
        return u * np.log((a2 + np.hypot(a2, u)) / (a1 + np.hypot(a1, u)))

    b = MU0_T_M_PER_A * turns / (2.0 * length_m * (a2 - a1)) * (
        f(np.add(z_m, length_m / 2.0)) - f(np.subtract(z_m, length_m / 2.0)))
    return float(b) if np.ndim(b) == 0 else b


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
    """A solenoid wound in close layers on a cylindrical former.

    Winding (what you measure or choose):

    * ``turns`` N, ``length_m`` the winding length b;
    * ``radius_m``: the inner radius a1 of the winding, i.e. the outer radius of the former;
    * the wire: ``wire_awg`` (ASTM B258) or ``wire_diameter_m`` (bare copper), exactly one;
      ``insulation_m`` (enamel, added to the bare diameter) gives the winding pitch p;
    * ``build_m``: the radial depth c of the winding; 0 means close-wound layers,
      turns_per_layer = floor(b / p) and c = (N / turns_per_layer) p (a part-filled last layer
      counts pro rata; a single layer has c = p).

    Derived: mean turn radius a = a1 + c/2 (wire length 2 pi a N, resistance, Wheeler's
    formula); field from uniform current density over a1..a1 + c.  This reproduces
    REFERENCE.md's worked coil: 500 turns of AWG 20 on a 40 mm radius former, 100 mm long,
    make 4.06 layers, a = 41.65 mm, R20 = 4.36 ohm.
    """

    turns: int
    radius_m: float
    length_m: float
    wire_awg: int | None = None
    build_m: float = 0.0
    wire_diameter_m: float = 0.0
    insulation_m: float = 0.0

    def __post_init__(self) -> None:
        if not (isinstance(self.turns, int) and self.turns >= 1):
            raise InputError(f"coil turns {self.turns!r} is not allowed; allowed: a whole number >= 1")
        for name in ("radius_m", "length_m"):
            if not getattr(self, name) > 0:
                raise InputError(f"coil {name} {getattr(self, name)!r} is not allowed; allowed: more than 0")
        for name in ("build_m", "insulation_m", "wire_diameter_m"):
            if getattr(self, name) < 0:
                raise InputError(f"coil {name} {getattr(self, name)!r} is not allowed; allowed: at least 0")
        if (self.wire_awg is None) == (self.wire_diameter_m == 0.0):
            raise InputError("coil wire: give exactly one of wire_awg and wire_diameter_m")
        if self.wire_awg is not None and not 0 <= self.wire_awg <= 40:
            raise InputError(f"coil wire_awg {self.wire_awg!r} is not allowed; allowed: 0 to 40")
        if self.pitch_m > self.length_m:
            raise InputError(f"coil length_m {self.length_m:g} is shorter than one wire pitch "
                             f"({self.pitch_m * 1e3:.3g} mm); allowed: at least one turn per layer")

    # ---- winding -------------------------------------------------------------------------
    @property
    def bare_diameter_m(self) -> float:
        return awg_diameter_m(self.wire_awg) if self.wire_awg is not None else self.wire_diameter_m

    @property
    def pitch_m(self) -> float:
        """Centre-to-centre spacing of neighbouring turns: bare diameter plus insulation."""
        return self.bare_diameter_m + self.insulation_m

    @property
    def turns_per_layer(self) -> int:
        return max(1, int(math.floor(self.length_m / self.pitch_m * (1 + 1e-12))))

    @property
    def layers(self) -> float:
        """Number of layers (fractional when the last one is part-filled)."""
        if self.build_m > 0.0:
            return self.build_m / self.pitch_m
        return max(1.0, self.turns / self.turns_per_layer)

    @property
    def winding_build_m(self) -> float:
        """Radial depth c used by every formula: build_m if given, else layers x pitch."""
        return self.build_m if self.build_m > 0.0 else self.layers * self.pitch_m

    @property
    def single_layer(self) -> bool:
        return self.layers <= 1.0 + 1e-9

    @property
    def mean_radius_m(self) -> float:
        return self.radius_m + self.winding_build_m / 2.0

    @property
    def outer_radius_m(self) -> float:
        return self.radius_m + self.winding_build_m

    # ---- electrical ----------------------------------------------------------------------
    @property
    def wire_length_m(self) -> float:
        """Wire length 2 pi a N (mean turn length times turns)."""
        return 2.0 * math.pi * self.mean_radius_m * self.turns

    @property
    def resistance_20c_ohm(self) -> float:
        return copper_resistance_ohm(self.wire_length_m, self.bare_diameter_m, REFERENCE_TEMPERATURE_C)

    def resistance_ohm(self, temperature_c: float) -> float:
        return copper_resistance_ohm(self.wire_length_m, self.bare_diameter_m, temperature_c)

    def axial_field_per_amp_t(self, z_m=0.0):
        """On-axis field per amp at z from the centre (thick winding), T/A."""
        return thick_solenoid_axial_field_per_amp_t(self.turns, self.radius_m, self.outer_radius_m,
                                                    self.length_m, z_m)

    @property
    def field_per_amp_t(self) -> float:
        """Centre field per amp of the thick winding, T/A (B1/i in the reciprocity EMF)."""
        return self.axial_field_per_amp_t(0.0)

    @property
    def inductance_h(self) -> float:
        """Wheeler's formula: single layer at the mean radius, else multilayer with the build."""
        build = 0.0 if self.single_layer else self.winding_build_m
        return wheeler_inductance_h(self.turns, self.mean_radius_m, self.length_m, build)

    @property
    def copper_mass_kg(self) -> float:
        return COPPER_DENSITY_KG_PER_M3 * self.wire_length_m * wire_area_m2(self.bare_diameter_m)

    @property
    def heat_capacity_j_per_k(self) -> float:
        """Heat capacity of the copper alone, m c_p (the winding's lower bound)."""
        return self.copper_mass_kg * COPPER_SPECIFIC_HEAT_J_PER_KG_K

    def time_constant_s(self, temperature_c: float = 20.0) -> float:
        """tau = L / R."""
        return self.inductance_h / self.resistance_ohm(temperature_c)
