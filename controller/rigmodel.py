"""Derived physical models of a rig's configuration (coil, thermal), used by checks and the simulator."""

from __future__ import annotations

from controller.config.schema import CoilConfig
from controller.physics.coil import CoilModel
from controller.physics.thermal import CoilThermal, thermal_model_for


def coil_model(coil: CoilConfig) -> CoilModel:
    return CoilModel(turns=coil.turns, radius_m=coil.radius_m, length_m=coil.length_m,
                     wire_awg=coil.wire_awg, wire_diameter_m=coil.wire_diameter_m,
                     insulation_m=coil.insulation_m, build_m=coil.build_m)


def coil_thermal_model(coil: CoilConfig) -> CoilThermal:
    return thermal_model_for(coil, coil_model(coil))
