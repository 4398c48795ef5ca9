"""Signal budget: REFERENCE.md's worked example end to end, the estimation floor, and the simulator."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from controller.cli.main import main
from controller.physics.coil import CoilModel
from controller.physics.magnetisation import (
    curie_magnetisation_a_per_m, johnson_noise_density_v_per_rthz, reciprocity_emf_v, water_proton_density_per_m3,
)
from controller.physics.precision import (
    frequency_crb_sd_hz, optimal_polarise_s, shots_for_precision, snr_rate, undamped_frequency_crb_sd_hz,
)
from controller.planning.planfile import load_plan
from controller.planning.signal import plan_budgets

ROOT = Path(__file__).resolve().parents[1]
DEMO_PLAN = ROOT / "configs" / "plans" / "heron-2-kestrel-flats.toml"


# ---- the worked example, formula by formula ----------------------------------------------------
def test_worked_example_magnetisation_emf_noise_and_snr():
    # source: REFERENCE.md worked example [calc]: 0.5 L water, 20 mT, 50 uT, B1/i 4.91 mT/A -> emf0 2.16 uV;
    # R 4.36 ohm -> e_n 0.266 nV/rtHz; SNR about 800 in 100 Hz; N = 6.674e28 /m^3; M0 = 6.56e-5 A/m at 20 mT
    n = water_proton_density_per_m3(20.0)
    assert n == pytest.approx(6.674e28, rel=5e-4)
    m0 = curie_magnetisation_a_per_m(0.020, 20.0, n)
    assert m0 == pytest.approx(6.56e-5, rel=2e-3)
    assert curie_magnetisation_a_per_m(50e-6, 20.0, n) == pytest.approx(1.64e-7, rel=2e-3)
    emf = reciprocity_emf_v(2128.82, 4.91e-3, m0, 0.5e-3)
    # the example's 2.16 includes Be added along Bp (20.05 mT -> 2.158 uV); at 20.00 mT it is 2.154 uV
    assert emf == pytest.approx(2.16e-6, rel=5e-3)
    e_n = johnson_noise_density_v_per_rthz(4.36, 20.0)
    assert e_n == pytest.approx(0.266e-9, abs=0.0005e-9)
    assert emf / (e_n * math.sqrt(100.0)) == pytest.approx(800, rel=0.03)


def write_worked_example_files(tmp_path: Path, current_a: float) -> Path:
    """REFERENCE.md's worked example as rig, site, sample, sequence and plan files."""
    (tmp_path / "site.toml").write_text('name = "worked example"\nfield_nt = 50000.0\ngradient_nt_per_m = 0.0\n')
    (tmp_path / "sample.toml").write_text('name = "0.5 L water"\nvolume_l = 0.5\ntemperature_c = 20.0\n'
                                          't1_s = 2.0\nt2_s = 2.0\n')
    (tmp_path / "rig.toml").write_text(f'''name = "worked example"
[coil]
turns = 500
radius_m = 0.040
length_m = 0.100
wire_awg = 20
heat_capacity_j_per_k = 1e6
ambient_c = 20.0
[limits]
max_current_a = 10.0
max_polarise_s = 600.0
max_duty_cycle = 1.0
max_flyback_energy_j = 100.0
max_coil_temperature_c = 150.0
[receive]
preamp_noise_nv_per_rthz = 0.0
gain = 1000.0
highpass_hz = 0.0
[simulator]
site = "site.toml"
sample = "sample.toml"
''')
    (tmp_path / "seq.toml").write_text(f'''name = "worked"
kind = "fid"
recovery_s = 0.0
[polarise]
current_a = {current_a!r}
duration_s = 40.0
[switch_off]
ramp_s = 0.00002
[receive]
dead_time_s = 0.0
acquire_s = 1.0
''')
    plan = tmp_path / "plan.toml"
    plan.write_text('name = "worked example"\nrig = "rig.toml"\nsequence = "seq.toml"\n')
    return plan


def test_worked_example_through_the_whole_signal_plan(tmp_path):
    # source: REFERENCE.md worked example (2.16 uV at B1/i 4.91 mT/A; SNR about 800 in 100 Hz), scaled by the
    # model's B1/i for the 3.3 mm build (see test_plan_coil_physics)
    coil = CoilModel(turns=500, radius_m=0.040, length_m=0.100, wire_awg=20)
    plan = load_plan(write_worked_example_files(tmp_path, 0.020 / coil.field_per_amp_t))
    _, budget, _, _ = plan_budgets(plan.rig.config, plan.site, plan.sample, plan.sequence, 100.0)
    assert budget.polarising_field_t == pytest.approx(0.020, rel=1e-9)
    assert budget.magnetisation_equilibrium_a_per_m == pytest.approx(6.56e-5, rel=2e-3)
    assert budget.regime == "sudden" and budget.transverse_fraction > 0.999
    scale = coil.field_per_amp_t / 4.91e-3
    assert budget.emf0_v == pytest.approx(2.16e-6 * scale, rel=5e-3)
    assert budget.coil_resistance_ohm == pytest.approx(4.36, abs=0.01)
    assert budget.noise_v_per_rthz == pytest.approx(0.266e-9, rel=3e-3)
    assert budget.snr == pytest.approx(800 * scale, rel=0.03)


# ---- the Cramer-Rao floor -------------------------------------------------------------------------
def test_damped_bound_reduces_to_rife_and_boorstyn_when_undamped():
    # source: Rife & Boorstyn, IEEE Trans. IT-20:591 (1974): var(w) = 24 sigma^2 / (A^2 dt^2 N (N^2 - 1))
    fs, duration, e_n, amplitude = 8000.0, 0.5, 3e-9, 1e-6
    sigma = e_n * math.sqrt(fs / 2)
    expected = undamped_frequency_crb_sd_hz(amplitude, sigma, 1 / fs, int(fs * duration))
    assert frequency_crb_sd_hz(amplitude, e_n, fs, duration, math.inf) == pytest.approx(expected, rel=1e-9)
    # source: REFERENCE.md continuous form [calc]: sigma_f ~ sqrt(3) e_n / (pi A T^1.5)
    assert expected == pytest.approx(math.sqrt(3) * e_n / (math.pi * amplitude * duration**1.5), rel=1e-3)


def test_damped_bound_matches_the_inverse_fisher_information_of_the_full_model():
    # source: Cramer-Rao bound from the 4x4 Fisher information J^T J / sigma^2 of A exp(-r t) cos(w t + phi),
    # parameters (w, r, A, phi), inverted numerically (an independent route to the closed form)
    fs, duration, t2star, amplitude, e_n, f = 8000.0, 1.0, 0.4, 1e-6, 2e-9, 2054.3
    t = np.arange(int(fs * duration)) / fs
    w, r, phi = 2 * np.pi * f, 1 / t2star, 0.7
    env = amplitude * np.exp(-r * t)
    jac = np.stack([-env * t * np.sin(w * t + phi), -t * env * np.cos(w * t + phi),
                    env / amplitude * np.cos(w * t + phi), -env * np.sin(w * t + phi)], axis=1)
    sigma2 = e_n**2 * fs / 2
    crb_w = np.linalg.inv(jac.T @ jac / sigma2)[0, 0]
    assert frequency_crb_sd_hz(amplitude, e_n, fs, duration, t2star) == pytest.approx(
        math.sqrt(crb_w) / (2 * np.pi), rel=0.01)


def test_shots_needed_for_a_target():
    # source: [calc] sd / sqrt(n) <= target
    assert shots_for_precision(0.3, 0.1) == 9
    assert shots_for_precision(0.1, 0.1) == 1
    assert shots_for_precision(0.31, 0.1) == 10


def test_optimal_polarising_time():
    # source: REFERENCE.md: best SNR per unit time near tp = 1.26 T1 for short acquisitions
    assert optimal_polarise_s(1.0, 0.0) == pytest.approx(1.2564, abs=1e-4)
    # source: numerical maximisation (scipy minimize_scalar) of (1 - exp(-tp/T1)) / sqrt(tp + t_o)
    t1, other = 2.3, 1.52
    best = minimize_scalar(lambda tp: -snr_rate(tp, t1, other), bounds=(0.01, 30), method="bounded",
                           options={"xatol": 1e-8})
    assert optimal_polarise_s(t1, other) == pytest.approx(best.x, rel=1e-5)


# ---- the demo plan against the simulated rig --------------------------------------------------------
def test_demo_plan_predicts_what_the_simulated_rig_records(tmp_path, capsys):
    # source: the simulator (drivers/simulated) shares the physics; this checks the plan wires it up the same way
    assert main(["plan", "signal", str(DEMO_PLAN), "--json"]) == 0
    plan = json.loads(capsys.readouterr().out)
    assert main(["run", str(ROOT / "configs/sequences/fid-sudden.toml"), "--rig", str(ROOT / "configs/rigs/demo-sim.toml"),
                 "--shots", "2", "--db", str(tmp_path / "run.sqlite"), "--json"]) == 0
    run = json.loads(capsys.readouterr().out)
    gain, highpass = plan["adc"]["gain"], plan["adc"]["highpass_gain"]
    assert run["amplitude"] == pytest.approx(plan["signal"]["emf0_v"] * gain * highpass, rel=0.05)
    assert run["t2star_s"] == pytest.approx(plan["signal"]["t2star_s"], rel=0.1)
    assert run["frequency_hz"] == pytest.approx(plan["signal"]["larmor_hz"], abs=1.5)  # diurnal swing 25 nT
