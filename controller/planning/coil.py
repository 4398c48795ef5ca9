"""Coil plan: winding, resistance, field, inductance, heating, switch-off and tuning of one solenoid.

Every number comes from controller.physics (the same models the simulator and the pre-run
checks use); this module only gathers them into sections.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.integrate import trapezoid

from controller.physics import circuit
from controller.physics.coil import CoilModel
from controller.physics.constants import gamma_hz_per_nt
from controller.physics.magnetisation import adiabatic_rate_t_per_s, switch_off_regime
from controller.physics.thermal import ThermalModel
from controller.physics.thermal_two_node import TwoNodeThermalModel
from controller.physics.wire import copper_resistance_ohm
from controller.planning.report import Row, Section

UNIFORMITY_POINTS = 201


@dataclass(frozen=True)
class CoilDuty:
    """How the coil is driven and where it sits: the inputs beyond the winding itself."""

    current_a: float
    polarise_s: float
    hot_c: float               # temperature for the hot resistance and the duty limit
    clamp_voltage_v: float
    earth_field_nt: float
    sample_length_m: float
    thermal: ThermalModel | TwoNodeThermalModel  # the rig's own model (rigmodel / thermal_model_for)


def wire_name(coil: CoilModel) -> str:
    return f"AWG {coil.wire_awg}" if coil.wire_awg is not None else f"{coil.bare_diameter_m * 1e3:g} mm"


def axial_uniformity(coil: CoilModel, sample_length_m: float) -> tuple[float, float, float]:
    """(centre, at the sample's ends, mean along the sample's axis) field per amp, T/A (on the axis only)."""
    z = np.linspace(-sample_length_m / 2.0, sample_length_m / 2.0, UNIFORMITY_POINTS)
    b = coil.axial_field_per_amp_t(z)
    return coil.field_per_amp_t, float(b[-1]), float(trapezoid(b, z) / sample_length_m)


def coil_plan(coil: CoilModel, duty: CoilDuty) -> list[Section]:
    return [_winding(coil), _resistance(coil, duty), _field(coil, duty), _inductance(coil, duty),
            _heating(coil, duty), _switch_off(coil, duty), _tuning(coil, duty)]


def _winding(coil: CoilModel) -> Section:
    return Section("winding", "Winding", (
        Row("turns", "turns", coil.turns),
        Row("inner_radius_m", "inner radius (former)", coil.radius_m, "mm", 1e3, ".2f"),
        Row("length_m", "winding length", coil.length_m, "mm", 1e3, ".1f"),
        Row("wire", "wire", wire_name(coil)),
        Row("bare_diameter_m", "bare diameter", coil.bare_diameter_m, "mm", 1e3, ".4f"),
        Row("pitch_m", "pitch (with insulation)", coil.pitch_m, "mm", 1e3, ".4f"),
        Row("turns_per_layer", "turns per layer", coil.turns_per_layer),
        Row("layers", "layers", coil.layers, digits=".2f"),
        Row("build_m", "build (radial depth)", coil.winding_build_m, "mm", 1e3, ".2f"),
        Row("mean_radius_m", "mean turn radius", coil.mean_radius_m, "mm", 1e3, ".2f"),
        Row("outer_radius_m", "outer radius", coil.outer_radius_m, "mm", 1e3, ".2f"),
        Row("wire_length_m", "wire length", coil.wire_length_m, "m", digits=".1f"),
        Row("copper_mass_kg", "copper mass", coil.copper_mass_kg, "g", 1e3, ".0f"),
    ), notes=("build from close-wound layers unless given; a scramble-wound coil is deeper: measure it",))


def _resistance(coil: CoilModel, duty: CoilDuty) -> Section:
    return Section("resistance", "Resistance (IEC 60028 copper, alpha 0.00393 /K)", (
        Row("ohm_per_km_20c", "wire resistance per km at 20 C",
            copper_resistance_ohm(1000.0, coil.bare_diameter_m), "ohm/km", digits=".2f"),
        Row("resistance_20c_ohm", "coil at 20 C", coil.resistance_20c_ohm, "ohm", digits=".3f"),
        Row("ambient_c", "ambient", duty.thermal.ambient_c, "C", digits=".1f"),
        Row("resistance_ambient_ohm", "coil at ambient", coil.resistance_ohm(duty.thermal.ambient_c), "ohm",
            digits=".3f"),
        Row("hot_c", "hot temperature", duty.hot_c, "C", digits=".1f"),
        Row("resistance_hot_ohm", "coil when hot", coil.resistance_ohm(duty.hot_c), "ohm", digits=".3f"),
    ))


def _field(coil: CoilModel, duty: CoilDuty) -> Section:
    centre, end, mean = axial_uniformity(coil, duty.sample_length_m)
    return Section("field", "Field (finite thick solenoid, on the axis)", (
        Row("field_per_amp_t_per_a", "centre field per amp", centre, "mT/A", 1e3, ".4f"),
        Row("polarising_field_t", f"centre field at {duty.current_a:g} A", centre * duty.current_a, "mT", 1e3,
            ".3f"),
        Row("sample_length_m", "sample length (centred)", duty.sample_length_m, "mm", 1e3, ".1f"),
        Row("sample_end_fraction", "field at the sample's ends / centre", end / centre, "%", 100, ".1f"),
        Row("sample_mean_fraction", "mean along the sample / centre", mean / centre, "%", 100, ".1f"),
    ))


def _inductance(coil: CoilModel, duty: CoilDuty) -> Section:
    formula = "single-layer" if coil.single_layer else "multilayer"
    return Section("inductance", "Inductance", (
        Row("inductance_h", f"L (Wheeler 1928, {formula})", coil.inductance_h, "mH", 1e3, ".3f"),
        Row("time_constant_20c_s", "L/R at 20 C", coil.time_constant_s(20.0), "ms", 1e3, ".2f"),
        Row("time_constant_hot_s", "L/R when hot", coil.time_constant_s(duty.hot_c), "ms", 1e3, ".2f"),
    ), notes=("Wheeler's multilayer formula is about 1 % for a near-square winding section and a few % "
              "low for a thin build",))


def _thermal_parameters(th: ThermalModel | TwoNodeThermalModel) -> tuple[Row, ...]:
    if isinstance(th, TwoNodeThermalModel):
        return (
            Row("heat_capacity_j_per_k", "winding heat capacity", th.winding_heat_capacity_j_per_k, "J/K",
                digits=".1f"),
            Row("thermal_resistance_k_per_w", "thermal resistance winding to ambient",
                th.winding_to_ambient_k_per_w, "K/W", digits=".2f"),
            Row("former_heat_capacity_j_per_k", "former heat capacity", th.former_heat_capacity_j_per_k, "J/K",
                digits=".1f"),
            Row("winding_to_former_k_per_w", "thermal resistance winding to former",
                th.winding_to_former_k_per_w, "K/W", digits=".2f"),
        )
    return (
        Row("heat_capacity_j_per_k", "heat capacity", th.heat_capacity_j_per_k, "J/K", digits=".1f"),
        Row("thermal_resistance_k_per_w", "thermal resistance to ambient", th.thermal_resistance_k_per_w, "K/W",
            digits=".2f"),
    )


def _heating(coil: CoilModel, duty: CoilDuty) -> Section:
    th, i = duty.thermal, duty.current_a
    after = th.step(th.ambient_c, i, duty.polarise_s)
    return Section("heating", f"Heating at {i:g} A ({th.model_name} thermal model)", (
        Row("thermal_model", "thermal model", th.model_name),
        Row("power_ambient_w", "power at ambient", th.power_w(i, th.ambient_c), "W", digits=".2f"),
        Row("power_hot_w", "power when hot", th.power_w(i, duty.hot_c), "W", digits=".2f"),
        *_thermal_parameters(th),
        Row("heating_rate_k_per_s", "initial heating rate", th.heating_rate_k_per_s(i, th.ambient_c), "K/s",
            digits=".3f"),
        Row("polarise_s", "one polarising pulse", duty.polarise_s, "s", digits=".2f"),
        Row("rise_per_pulse_k", "rise over one pulse", after - th.ambient_c, "K", digits=".2f"),
        Row("steady_state_c", "steady temperature if left on", th.steady_state_c(i), "C", digits=".1f"),
        Row("time_to_hot_s", f"left on, reaches {duty.hot_c:g} C after", th.time_to_reach_s(i, th.ambient_c, duty.hot_c),
            "s", digits=".0f"),
        Row("max_duty_cycle", f"duty cycle that stays below {duty.hot_c:g} C", th.max_duty_cycle(i, duty.hot_c),
            "%", 100, ".0f"),
    ), notes=("insulation classes (IEC 60085) are hot-spot limits: A 105, E 120, B 130, F 155, H 180 C; "
              "keep the average well below",))


def _switch_off(coil: CoilModel, duty: CoilDuty) -> Section:
    i = duty.current_a
    r_hot = coil.resistance_ohm(duty.hot_c)
    t_off = circuit.clamp_switch_off_time_s(coil.inductance_h, r_hot, i, duty.clamp_voltage_v)
    final_rate = coil.field_per_amp_t * circuit.clamp_final_current_slope_a_per_s(coil.inductance_h,
                                                                                   duty.clamp_voltage_v)
    be_t = duty.earth_field_nt * 1e-9
    ratio, regime = switch_off_regime(final_rate, be_t)
    return Section("switch_off", f"Switch-off from {i:g} A through a {duty.clamp_voltage_v:g} V clamp", (
        Row("flyback_energy_j", "stored energy 1/2 L I^2", circuit.flyback_energy_j(coil.inductance_h, i), "J",
            digits=".3g"),
        Row("clamp_voltage_v", "clamp voltage", duty.clamp_voltage_v, "V", digits=".0f"),
        Row("switch_off_s", "current falls to zero in", t_off, "ms", 1e3, ".3f"),
        Row("final_field_rate_t_per_s", "dBp/dt as the current reaches zero", final_rate, "T/s", digits=".3g"),
        Row("adiabatic_rate_t_per_s", f"gamma Be^2 at {duty.earth_field_nt:g} nT", adiabatic_rate_t_per_s(be_t),
            "T/s", digits=".3g"),
        Row("ratio", "ratio", ratio, digits=".3g"),
        Row("regime", "switch-off is", regime),
    ), notes=("sudden (ratio >> 1) leaves M across the field for a FID without a pulse; adiabatic "
              "(<< 1) leaves it along the field and needs a 90 degree pulse",
              "the clamp and switch must take the full energy and voltage at every shot; see safety.md"))


def _tuning(coil: CoilModel, duty: CoilDuty) -> Section:
    f = duty.earth_field_nt * gamma_hz_per_nt("shielded")
    r = coil.resistance_ohm(duty.thermal.ambient_c)
    return Section("tuning", f"Tuning to the Larmor frequency at {duty.earth_field_nt:g} nT", (
        Row("larmor_hz", "Larmor frequency (shielded)", f, "Hz", digits=".2f"),
        Row("capacitance_f", "tuning capacitance", circuit.tuning_capacitance_f(coil.inductance_h, f), "uF", 1e6,
            ".4f"),
        Row("quality_factor", "Q (copper loss only)", circuit.quality_factor(coil.inductance_h, r, f), digits=".1f"),
        Row("bandwidth_hz", "-3 dB bandwidth R/(2 pi L)", circuit.resonance_bandwidth_hz(coil.inductance_h, r),
            "Hz", digits=".1f"),
    ), notes=("disconnect or protect the tuning capacitor while polarising: the flyback would charge it",))
