"""The coil's thermal models, the resistance method and the coil's stored energy, against
outside sources: analytic solutions, an independent ODE integrator, handbook values."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.constants import mu_0
from scipy.integrate import solve_ivp
from scipy.special import ellipe, ellipk

from controller.physics.coil import COPPER_ALPHA_PER_K, CoilModel, awg_diameter_m, copper_resistance_ohm, \
    wheeler_inductance_h
from controller.physics.thermal import ThermalModel
from controller.physics.thermal_two_node import TwoNodeThermalModel
from controller.supervisor.measured import expected_resistance_ohm, resistance_temperature_c

R20 = 4.186  # ohm, the Heron-2 coil: 500 turns of AWG 20 on a 40 mm radius


def test_one_node_step_response_without_alpha_is_the_rc_curve() -> None:
    # source: lumped-capacitance step response T = Ta + P R (1 - exp(-t / (R C)))
    # (Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, ch. 5; from memory)
    model = ThermalModel(R20, heat_capacity_j_per_k=250.0, thermal_resistance_k_per_w=4.0, ambient_c=18.0, alpha_per_k=0.0)
    power = 3.0**2 * R20
    for t in (1.0, 100.0, 1000.0, 5000.0):
        expected = 18.0 + power * 4.0 * (1.0 - math.exp(-t / (4.0 * 250.0)))
        assert model.step(18.0, 3.0, t) == pytest.approx(expected, rel=1e-12)


def test_one_node_with_copper_alpha_matches_an_independent_integrator() -> None:
    # source: scipy's RK45 (solve_ivp) on C dT/dt = I^2 R20 (1 + alpha (T - 20)) - (T - Ta)/R_th
    model = ThermalModel(R20, 250.0, 4.0, 18.0)
    c, r, i = 250.0, 4.0, 3.0

    def rhs(t: float, y: np.ndarray) -> list[float]:
        return [(i**2 * R20 * (1 + COPPER_ALPHA_PER_K * (y[0] - 20.0)) - (y[0] - 18.0) / r) / c]

    sol = solve_ivp(rhs, (0.0, 3000.0), [25.0], rtol=1e-11, atol=1e-11, t_eval=[10.0, 300.0, 3000.0])
    for t, expected in zip(sol.t, sol.y[0]):
        assert model.step(25.0, i, t) == pytest.approx(expected, abs=1e-7)
    # steady state solves T = Ta + I^2 R20 (1 + alpha (T - 20)) R_th in closed form [calc]
    p = i**2 * R20
    closed = (18.0 + p * r * (1 - 20 * COPPER_ALPHA_PER_K)) / (1 - p * r * COPPER_ALPHA_PER_K)
    assert model.steady_state_c(i) == pytest.approx(closed, rel=1e-12)


def _two_node_rhs(m: TwoNodeThermalModel, current_a: float):
    def rhs(t: float, y: np.ndarray) -> list[float]:
        w, f = y
        heat = current_a**2 * m.resistance_20c_ohm * (1 + m.alpha_per_k * (w - 20.0))
        return [(heat - (w - m.ambient_c) / m.winding_to_ambient_k_per_w - (w - f) / m.winding_to_former_k_per_w)
                / m.winding_heat_capacity_j_per_k,
                (w - f) / m.winding_to_former_k_per_w / m.former_heat_capacity_j_per_k]
    return rhs


def test_two_node_matches_an_independent_integrator() -> None:
    # source: scipy's RK45 (solve_ivp) on the two-node equations of thermal_two_node.py
    m = TwoNodeThermalModel(R20, 120.0, 4.0, 600.0, 0.5, 18.0)
    state = (18.0, 18.0)
    for current, duration in ((3.0, 400.0), (0.0, 250.0), (2.0, 37.5)):
        sol = solve_ivp(_two_node_rhs(m, current), (0.0, duration), list(state), rtol=1e-11, atol=1e-11)
        state_next = m.advance(state, current, duration)
        assert state_next == pytest.approx(tuple(sol.y[:, -1]), abs=1e-6)
        state = state_next


def test_two_node_reduces_to_one_node() -> None:
    # [calc] a former of vanishing heat capacity follows the winding: the one-node model again
    one = ThermalModel(R20, 250.0, 4.0, 18.0)
    two = TwoNodeThermalModel(R20, 250.0, 4.0, 1e-4, 0.5, 18.0)
    for t in (5.0, 500.0):
        assert two.step(18.0, 3.0, t) == pytest.approx(one.step(18.0, 3.0, t), abs=1e-3)
    # in steady state the former is at the winding's temperature, so R_wa alone sets it
    assert TwoNodeThermalModel(R20, 100.0, 4.0, 900.0, 2.0, 18.0).steady_state_c(3.0) == pytest.approx(
        one.steady_state_c(3.0), rel=1e-9)


def test_copper_resistance_and_temperature_coefficient() -> None:
    # source: IEC 60028 (1/58 ohm mm^2/m at 20 C) with ASTM B258 diameters: AWG 20 is 33.31 ohm/km
    # (REFERENCE.md table [calc])
    assert copper_resistance_ohm(1000.0, awg_diameter_m(20)) == pytest.approx(33.31, abs=0.01)
    # source: copper alpha20 = 0.00393 /K (from memory); +10 % resistance is +25.4 K (REFERENCE.md [calc])
    assert COPPER_ALPHA_PER_K == 0.00393
    assert resistance_temperature_c(1.1 * R20, R20, 20.0) - 20.0 == pytest.approx(0.1 / 0.00393, rel=1e-12)
    # the same law referred to a cold reading at 12 C: R(T)/R(T0) = (234.45 + T)/(234.45 + T0)
    r12 = copper_resistance_ohm(1000.0, awg_diameter_m(20), 12.0)
    r61 = copper_resistance_ohm(1000.0, awg_diameter_m(20), 61.0)
    assert resistance_temperature_c(r61, r12, 12.0) == pytest.approx(61.0, abs=1e-9)
    assert expected_resistance_ohm(61.0, r12, 12.0) == pytest.approx(r61, rel=1e-12)
    # source: IEC 60034-1 rise by resistance, T = R/R0 (235 + T0) - 235 (from memory): within 0.2 K
    assert resistance_temperature_c(r61, r12, 12.0) == pytest.approx(r61 / r12 * (235 + 12.0) - 235, abs=0.2)


def _nagaoka(diameter_over_length: float) -> float:
    """Nagaoka's coefficient from complete elliptic integrals (Nagaoka, J. Coll. Sci. Tokyo 27 (1909))."""
    k2 = diameter_over_length**2 / (diameter_over_length**2 + 1.0)
    k, kp = math.sqrt(k2), math.sqrt(1 - k2)
    big_k, big_e = ellipk(k2), ellipe(k2)
    return 4 / (3 * math.pi * kp) * (kp**2 / k2 * (big_k - big_e) + big_e - k)


def test_wheeler_inductance_and_stored_energy_of_the_worked_coil() -> None:
    # REFERENCE.md worked coil: 500 turns, radius 40 mm, length 100 mm (a single current sheet here)
    inductance_h = wheeler_inductance_h(500, 0.040, 0.100)
    # source: Wheeler, Proc. IRE 16:1398 (1928): a^2 N^2 / (9a + 10b) uH, inches -> 11.58 mH [calc]
    assert inductance_h == pytest.approx(1.5748**2 * 500**2 / (9 * 1.5748 + 10 * 3.937) * 1e-6, rel=1e-4)
    assert inductance_h == pytest.approx(11.58e-3, rel=1e-3)
    # source: Nagaoka's coefficient, tabulated 0.7351 for diameter/length 0.8 (Grover, Inductance
    # Calculations (1946); from memory), computed here from scipy's elliptic integrals
    assert _nagaoka(0.8) == pytest.approx(0.7351, abs=1e-4)
    nagaoka_h = _nagaoka(0.8) * mu_0 * 500**2 * math.pi * 0.040**2 / 0.100
    assert inductance_h == pytest.approx(nagaoka_h, rel=0.01)  # Wheeler claims ~1 % here
    # flyback energy 1/2 L I^2 at 2 A: 23.2 mJ [calc]
    assert 0.5 * inductance_h * 2.0**2 == pytest.approx(0.02316, rel=1e-3)
    # REFERENCE.md: R 4.36 ohm for the wound coil (AWG 20 close-wound on the 40 mm former)
    assert CoilModel(turns=500, radius_m=0.040, length_m=0.100, wire_awg=20).resistance_20c_ohm == pytest.approx(
        4.36, abs=0.01)
