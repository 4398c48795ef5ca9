"""The simulated instrument obeys the physics it claims.

Sources: Bloch (1946) equations; Abragam (1961) adiabatic condition dBp/dt << gamma Be^2 (REFERENCE.md:
0.67 T/s at 50 uT); Hoult & Richards (1976) reciprocity.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from controller.analysis.sources import analyse_records
from controller.clock import VirtualClock
from controller.config.loader import load_rig, load_sequence
from controller.engine import Engine
from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T, gamma_hz_per_nt
from controller.physics.magnetisation import curie_magnetisation_a_per_m, reciprocity_emf_v
from controller.records import ShotAcquired
from controller.rig import build_rig
from controller.sequences.compile import compile_sequence
from drivers.simulated import spins

from tests.conftest import DEMO_RIG, EPOCH_NOON_UTC, FID_ADIABATIC, FID_SUDDEN, quiet_rig

BE_T = 50e-6
BP_T = 20e-3
ADIABATIC_RATE_T_PER_S = GAMMA_SHIELDED_RAD_PER_S_T * BE_T**2  # gamma Be^2, 0.67 T/s (REFERENCE.md)


def _transverse_fraction_after_ramp(ramp_s: float, fs: float = 48000.0) -> float:
    n = max(1, int(round(ramp_s * fs)))
    gate = np.concatenate([[1.0], 1.0 - np.arange(1, n + 1) / n])
    m = spins.integrate_switch_off(np.array([1.0, 0.0, 0.0]), gate, fs, BP_T, BE_T, math.pi / 2,
                                   GAMMA_SHIELDED_RAD_PER_S_T)
    return math.hypot(m[0], m[1])


def test_adiabatic_rate_matches_reference():
    # source: REFERENCE.md [calc from Abragam's adiabatic condition]: gamma Be^2 = 0.67 T/s at 50 uT
    assert ADIABATIC_RATE_T_PER_S == pytest.approx(0.67, abs=0.01)


@pytest.mark.parametrize("rate_factor", [300.0, 100.0])
def test_sudden_switch_off_leaves_magnetisation_transverse(rate_factor):
    # source: Abragam (1961): dBp/dt >> gamma Be^2 -> non-adiabatic, M keeps its direction (perpendicular to Be)
    ramp_s = BP_T / (rate_factor * ADIABATIC_RATE_T_PER_S)
    assert _transverse_fraction_after_ramp(ramp_s) > 0.95


@pytest.mark.parametrize("rate_factor", [0.05, 0.02])
def test_slow_switch_off_follows_field(rate_factor):
    # source: Abragam (1961): dBp/dt << gamma Be^2 -> adiabatic, M follows B and ends along Be
    ramp_s = BP_T / (rate_factor * ADIABATIC_RATE_T_PER_S)
    assert _transverse_fraction_after_ramp(ramp_s) < 0.1


def test_switch_off_integration_converges():
    # common practice, no source: halving the step must not change the result materially
    gate = np.concatenate([[1.0], 1.0 - np.arange(1, 481) / 480])
    args = (np.array([1.0, 0.0, 0.0]), gate, 48000.0, BP_T, BE_T, math.pi / 2, GAMMA_SHIELDED_RAD_PER_S_T)
    coarse = spins.integrate_switch_off(*args)
    saved = spins.MAX_DIRECTION_STEP_RAD
    try:
        spins.MAX_DIRECTION_STEP_RAD = saved / 4
        fine = spins.integrate_switch_off(*args)
    finally:
        spins.MAX_DIRECTION_STEP_RAD = saved
    assert np.allclose(coarse, fine, atol=5e-3)


def test_isochromat_sum_decays_exponentially():
    # source: a Lorentzian offset distribution of half width 1/T2' has characteristic function exp(-t/T2')
    # (Poisson summation bounds the grid's aliases; the left-out tails dephase within ~1/(50 gamma))
    offsets, weights = spins.lorentzian_isochromats(2.0, span_s=1.5)
    iso = np.tile([1.0, 0.0, 0.0], (offsets.size, 1))
    t = np.linspace(0.1, 1.5, 50)
    env = spins.transverse_envelope(iso, offsets, weights, t, t2_s=1e9)
    assert np.allclose(np.abs(env), np.exp(-2.0 * t), atol=1e-3)


def _run_shots(loaded, sequence_path, shots: int):
    clock = VirtualClock(start_epoch_s=EPOCH_NOON_UTC)
    rig = build_rig(loaded, clock)
    spec = dataclasses.replace(load_sequence(sequence_path), shots=shots)
    timeline = compile_sequence(spec, 48000.0, rig.instrument.larmor_hz())
    records: list = []
    engine = Engine(rig, clock)
    engine.critical_sinks.append(records.append)
    outcome = engine.run(timeline, {})
    assert outcome.exit_status == "completed", outcome.reason
    shots_ = [r for r in records if isinstance(r, ShotAcquired)]
    return rig, shots_, records


def test_fid_analysis_recovers_truth_within_uncertainty():
    # source: truth from CODATA 2022 shielded gamma and the configured site field; estimator must be
    # consistent with its own reported uncertainty (3 sd)
    loaded = quiet_rig(load_rig(DEMO_RIG))
    rig, windows, _ = _run_shots(loaded, FID_SUDDEN, 4)
    result = analyse_records(windows).as_dict()
    inst = rig.instrument
    true_f = inst.larmor_hz(EPOCH_NOON_UTC)
    assert abs(result["frequency_hz"] - true_f) < 3 * result["frequency_sd_hz"] + 1e-4
    true_b = true_f / gamma_hz_per_nt("shielded")
    assert abs(result["field_nt"] - true_b) < 3 * result["field_sd_nt"] + 0.005
    assert abs(result["t2star_s"] - inst.t2star_s) < 3 * result["t2star_sd_s"] + 0.01


def test_fid_amplitude_matches_reciprocity():
    # source: Hoult & Richards (1976) emf0 = omega0 (B1/i) M V; Curie law; Bloch build-up (1 - exp(-tp/T1))
    loaded = quiet_rig(load_rig(DEMO_RIG))
    rig, windows, _ = _run_shots(loaded, FID_SUDDEN, 2)
    inst = rig.instrument
    result = analyse_records(windows).as_dict()
    spec = load_sequence(FID_SUDDEN)
    bp = inst.coil.field_per_amp_t * spec.polarise.current_a
    m0 = curie_magnetisation_a_per_m(math.hypot(bp, inst.earth_field_nt() * 1e-9), inst.sample.temperature_c,
                                     inst.proton_density_per_m3)
    # the second shot starts from what the first left (T1 recovery in the Earth's field, negligible M0)
    m = m0 * (1 - math.exp(-spec.polarise.duration_s / inst.sample.t1_s))
    emf = reciprocity_emf_v(inst.larmor_hz(), inst.coil.field_per_amp_t, m, inst.sample_volume_m3)
    gain = loaded.config.receive.gain
    # first-order AC coupling at 300 Hz attenuates 2 kHz by 1/sqrt(1 + (300/2055)^2)
    hp = 1 / math.sqrt(1 + (loaded.config.receive.highpass_hz / inst.larmor_hz()) ** 2)
    assert result["amplitude"] == pytest.approx(emf * gain * hp, rel=0.05)


def test_adiabatic_ramp_then_pulse_gives_fid():
    # source: after an adiabatic ramp M lies along Be and a 90 degree pulse tips it transverse
    # (t90 = pi / (2 gamma B1_rot), REFERENCE.md); without the pulse there is no FID
    loaded = quiet_rig(load_rig(DEMO_RIG))
    _, windows, _ = _run_shots(loaded, FID_ADIABATIC, 1)
    with_pulse = analyse_records(windows).as_dict()["amplitude"]
    _, sudden, _ = _run_shots(loaded, FID_SUDDEN, 1)
    assert with_pulse > 0.5 * analyse_records(sudden).as_dict()["amplitude"]


def test_simulation_is_seeded():
    loaded = load_rig(DEMO_RIG)
    _, a, _ = _run_shots(loaded, FID_SUDDEN, 1)
    _, b, _ = _run_shots(loaded, FID_SUDDEN, 1)
    assert np.array_equal(a[0].samples, b[0].samples)
