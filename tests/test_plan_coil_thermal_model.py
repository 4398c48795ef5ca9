"""`precess plan coil --rig` heats the coil with the rig's own thermal model (one or two nodes)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from scipy.integrate import solve_ivp

from controller.cli.main import main
from controller.physics.wire import COPPER_ALPHA_PER_K

ROOT = Path(__file__).resolve().parents[1]
RIG = ROOT / "configs/rigs/demo-sim.toml"
# demo rig [coil] and [limits]: 3 A, 8 s pulses, 250 J/K, 4 K/W, 18 C ambient, 70 C hot limit
C_W, R_WA, AMBIENT_C = 250.0, 4.0, 18.0
C_F, R_WF = 400.0, 0.5


def plan_heating(capsys, rig: Path) -> tuple[float, float, dict]:
    assert main(["plan", "coil", "--rig", str(rig), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    return out["resistance"]["resistance_20c_ohm"], out["resistance"]["hot_c"], out["heating"]


def two_node_rig(tmp_path: Path) -> Path:
    text = RIG.read_text().replace("clamp_voltage_v = 150.0",
                                   f"clamp_voltage_v = 150.0\nformer_heat_capacity_j_per_k = {C_F}\n"
                                   f"winding_to_former_k_per_w = {R_WF}")
    text = text.replace('"../', f'"{RIG.parent.parent}/')
    assert "former_heat_capacity_j_per_k" in text
    path = tmp_path / "heron-2-potted.toml"
    path.write_text(text)
    return path


def test_two_node_rig_plans_with_the_two_node_model(capsys, tmp_path):
    r20, hot_c, heating = plan_heating(capsys, two_node_rig(tmp_path))
    assert heating["thermal_model"] == "two-node"
    current_a, polarise_s = 3.0, 8.0

    # source: scipy.integrate.solve_ivp (RK45) on the two-node equations
    #   C_w dTw/dt = I^2 R20 (1 + alpha (Tw - 20)) - (Tw - Ta)/R_wa - (Tw - Tf)/R_wf,  C_f dTf/dt = (Tw - Tf)/R_wf
    def rhs(t, y):
        w, f = y
        heat = current_a**2 * r20 * (1 + COPPER_ALPHA_PER_K * (w - 20.0))
        return [(heat - (w - AMBIENT_C) / R_WA - (w - f) / R_WF) / C_W, (w - f) / R_WF / C_F]

    def reaches_hot(t, y):
        return y[0] - hot_c
    reaches_hot.terminal = True
    sol = solve_ivp(rhs, (0.0, 1e5), [AMBIENT_C, AMBIENT_C], events=reaches_hot, dense_output=True,
                    rtol=1e-10, atol=1e-10)
    assert heating["rise_per_pulse_k"] == pytest.approx(sol.sol(polarise_s)[0] - AMBIENT_C, rel=1e-6)
    assert heating["time_to_hot_s"] == pytest.approx(sol.t_events[0][0], rel=1e-6)
    # the former soaks up heat: the hot limit comes later than the one-node model would say
    b = (1 / R_WA - current_a**2 * r20 * COPPER_ALPHA_PER_K) / C_W
    a = (current_a**2 * r20 * (1 - 20 * COPPER_ALPHA_PER_K) + AMBIENT_C / R_WA) / C_W
    one_node_s = math.log((AMBIENT_C - a / b) / (hot_c - a / b)) / b
    assert heating["time_to_hot_s"] > 1.5 * one_node_s
    # steady state: no heat into the former, so Tw = Ta + I^2 R(Tw) R_wa, solved for Tw [calc]
    p = current_a**2 * r20
    closed = (AMBIENT_C + p * R_WA * (1 - 20 * COPPER_ALPHA_PER_K)) / (1 - p * R_WA * COPPER_ALPHA_PER_K)
    assert heating["steady_state_c"] == pytest.approx(closed, rel=1e-9)
    assert heating["former_heat_capacity_j_per_k"] == C_F


def test_one_node_rig_is_unchanged(capsys):
    r20, hot_c, heating = plan_heating(capsys, RIG)
    assert heating["thermal_model"] == "one-node"
    assert "former_heat_capacity_j_per_k" not in heating
    current_a, polarise_s = 3.0, 8.0
    # source: closed-form solution of C dT/dt = I^2 R20 (1 + alpha (T - 20)) - (T - Ta)/R_th,
    #   T(t) = T_inf + (T0 - T_inf) exp(-b t) (see controller/physics/thermal.py's docstring)
    p = current_a**2 * r20
    a = (p * (1 - 20 * COPPER_ALPHA_PER_K) + AMBIENT_C / R_WA) / C_W
    b = (1 / R_WA - p * COPPER_ALPHA_PER_K) / C_W
    t_inf = a / b
    assert heating["rise_per_pulse_k"] == pytest.approx(
        t_inf + (AMBIENT_C - t_inf) * math.exp(-b * polarise_s) - AMBIENT_C, rel=1e-12)
    assert heating["time_to_hot_s"] == pytest.approx(math.log((AMBIENT_C - t_inf) / (hot_c - t_inf)) / b, rel=1e-12)
    assert heating["steady_state_c"] == pytest.approx(t_inf, rel=1e-12)
