"""Each sequence, run on the simulated rig, recovers the truth the simulator was configured with.

The simulator computes the signal from the Bloch equations (its own code); these tests run
the whole chain - compile, engine, simulated instrument, analysis - and compare the fitted
quantity with the configured truth and with the published behaviour of the sequence.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants

from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T
from controller.physics.magnetisation import johnson_noise_density_v_per_rthz
from controller.rigmodel import coil_model
from drivers.simulated.transceiver import TRANSMIT_A_PER_V
from sequence_rigs import ADIABATIC, POLARISE, TWO_STEP, rig, run_and_analyse

T90_S = 0.0048  # nominal 90 deg pulse at 0.5 V on the demo coil (checked against the truth below)


def true_t90_s(loaded, amplitude_v: float) -> float:
    """t90 = pi / (2 gamma B1_rot), B1_rot half the linear field (REFERENCE.md; Abragam 1961)."""
    b1_linear = TRANSMIT_A_PER_V * amplitude_v * coil_model(loaded.config.coil).field_per_amp_t * math.sin(
        math.radians(loaded.config.coil.axis_to_field_deg))
    return math.pi / (2 * GAMMA_SHIELDED_RAD_PER_S_T * b1_linear / 2)


def within(value: float, truth: float, fraction: float) -> bool:
    return abs(value - truth) <= fraction * truth


def test_cpmg_recovers_t2():
    # source: Meiboom & Gill, Rev. Sci. Instrum. 29:688 (1958): the CPMG echo train decays with T2 alone
    loaded = rig()
    result, _ = run_and_analyse({
        "name": "t", "kind": "cpmg", "shots": 2, "polarise": POLARISE, "switch_off": ADIABATIC,
        "excite": {"duration_s": T90_S, "amplitude_v": 0.5}, "refocus": {"duration_s": 2 * T90_S, "amplitude_v": 0.5},
        "echo_spacing_s": 0.06, "echoes": 50, "echo_window_s": 0.02, "phase_cycle": TWO_STEP}, loaded)
    assert result["headline"]["quantity"] == "T2"
    assert within(result["t2_s"], loaded.sample.t2_s, 0.05), result["t2_s"]
    assert 0 < result["t2_sd_s"] < 0.05 * loaded.sample.t2_s


def test_hahn_echo_series_recovers_t2():
    # source: Hahn, Phys. Rev. 80:580 (1950): the echo at TE refocuses the offsets; its height decays as exp(-TE/T2)
    loaded = rig(simulator={"mains_amplitude_uv": 0.3})
    result, _ = run_and_analyse({
        "name": "t", "kind": "echo", "shots": 2, "polarise": POLARISE,
        "refocus": {"duration_s": 2 * T90_S, "amplitude_v": 0.5}, "echo_times_s": [0.2, 0.6, 1.1, 1.7, 2.4],
        "echo_window_s": 0.1, "phase_cycle": {"refocus_deg": [0.0, 180.0], "receiver_deg": [0.0]},
        "receive": {"dead_time_s": 0.015, "acquire_s": 1.3}}, loaded)
    assert within(result["t2_s"], loaded.sample.t2_s, 0.05), result["t2_s"]


def test_t1_polarise_recovers_t1_at_the_polarising_field():
    # source: Bloch, Phys. Rev. 70:460 (1946): M(tp) = M0 (1 - exp(-tp/T1))
    loaded = rig(sample={"t1_earth_s": 1.8})
    result, _ = run_and_analyse({
        "name": "t", "kind": "t1-polarise", "shots": 1, "recovery_s": 8.0, "polarise": {"current_a": 2.0},
        "polarise_times_s": [0.3, 0.8, 1.5, 2.5, 4.0, 6.5]}, loaded)
    assert within(result["t1_s"], loaded.sample.t1_s, 0.05), result["t1_s"]


def test_t1_earth_recovers_t1_in_the_earths_field():
    # source: Bloch (1946): with the coil off M relaxes towards the Earth's-field equilibrium with T1 there;
    # the sample's T1 differs between the fields here, so the test also tells which field was measured
    loaded = rig(sample={"t1_earth_s": 1.8})
    result, _ = run_and_analyse({
        "name": "t", "kind": "t1-earth", "shots": 2, "recovery_s": 3.0, "polarise": POLARISE, "switch_off": ADIABATIC,
        "pulse": {"duration_s": T90_S, "amplitude_v": 0.5}, "earth_delays_s": [0.02, 0.5, 1.1, 2.0, 3.2, 4.5],
        "phase_cycle": TWO_STEP}, loaded)
    assert within(result["t1_s"], 1.8, 0.05), result["t1_s"]


def test_nutation_recovers_the_90_degree_pulse_and_b1():
    loaded = rig()
    truth = true_t90_s(loaded, 0.5)
    assert abs(truth - T90_S) < 0.02 * truth  # the nominal length used by the other tests is a 90 deg pulse
    result, _ = run_and_analyse({
        "name": "t", "kind": "nutation", "shots": 2, "polarise": POLARISE, "switch_off": ADIABATIC,
        "pulse": {"amplitude_v": 0.5}, "pulse_lengths_s": [0.001, 0.002, 0.003, 0.005, 0.007, 0.009, 0.011, 0.013],
        "phase_cycle": TWO_STEP}, loaded)
    assert within(result["pulse_90_s"], truth, 0.02), (result["pulse_90_s"], truth)
    # B1_rot = pi / (2 gamma t90 a) (REFERENCE.md), consistent with the fitted t90
    assert math.isclose(result["b1_rot_t_per_v"], math.pi / (2 * GAMMA_SHIELDED_RAD_PER_S_T * result["pulse_90_s"] * 0.5))


def test_nutation_by_amplitude_finds_the_amplitude_of_a_90_degree_pulse():
    # theta = gamma B1_rot t with B1_rot proportional to the drive: at a fixed length t the 90 deg drive is
    # a90 = 0.5 V * t90(0.5 V) / t
    loaded = rig()
    length_s = 0.003
    expected_v = 0.5 * true_t90_s(loaded, 0.5) / length_s
    result, _ = run_and_analyse({
        "name": "t", "kind": "nutation", "shots": 2, "polarise": POLARISE, "switch_off": ADIABATIC,
        "pulse": {"duration_s": length_s}, "pulse_amplitudes_v": [0.15, 0.3, 0.5, 0.7, 1.0, 1.3],
        "phase_cycle": TWO_STEP}, loaded)
    assert result["headline"]["quantity"] == "90 deg pulse amplitude"
    assert within(result["amplitude_90_v"], expected_v, 0.02), (result["amplitude_90_v"], expected_v)


def test_t2star_from_fid_and_t2_from_cpmg_differ_by_the_offset_spread():
    # source: 1/T2* = 1/T2 + 1/T2', the inhomogeneous part refocused by echoes (Hahn 1950; Carr & Purcell,
    # Phys. Rev. 94:630 (1954)); here 1/T2' = pi (gamma/2pi) G L from the site's gradient (REFERENCE.md)
    loaded = rig(site={"gradient_nt_per_m": 300.0})
    fid, run = run_and_analyse({"name": "t", "kind": "fid", "shots": 2, "polarise": POLARISE,
                                "receive": {"dead_time_s": 0.015, "acquire_s": 0.8}}, loaded)
    cpmg, _ = run_and_analyse({
        "name": "t", "kind": "cpmg", "shots": 2, "polarise": POLARISE, "switch_off": ADIABATIC,
        "excite": {"duration_s": T90_S, "amplitude_v": 0.5}, "refocus": {"duration_s": 2 * T90_S, "amplitude_v": 0.5},
        "echo_spacing_s": 0.06, "echoes": 40, "echo_window_s": 0.02, "phase_cycle": TWO_STEP}, loaded)
    spread_rate = run.rig.instrument.inhomogeneous_rate_per_s
    length_m = (loaded.sample.volume_l * 1e-3) ** (1 / 3)
    assert math.isclose(spread_rate, math.pi * 0.04257638543 * 300.0 * length_m, rel_tol=1e-6)
    assert fid["t2star_s"] < 0.5 * cpmg["t2_s"]
    measured = 1 / fid["t2star_s"] - 1 / cpmg["t2_s"]
    assert within(measured, spread_rate, 0.10), (measured, spread_rate)
    assert within(cpmg["t2_s"], loaded.sample.t2_s, 0.05)


def test_cpmg_keeps_its_echoes_with_a_pulse_angle_error_while_cp_decays():
    # source: Meiboom & Gill, Rev. Sci. Instrum. 29:688 (1958): shifting the refocusing pulses by 90 deg
    # makes the train insensitive to their angle error, which in the Carr-Purcell train accumulates
    loaded = rig(site={"gradient_nt_per_m": 300.0}, simulator={"mains_amplitude_uv": 0.3})
    trains = {}
    for variant in ("cpmg", "cp"):
        result, _ = run_and_analyse({
            "name": "t", "kind": "cpmg", "variant": variant, "shots": 2, "polarise": POLARISE,
            "switch_off": ADIABATIC, "excite": {"duration_s": T90_S, "amplitude_v": 0.5},
            "refocus": {"duration_s": 0.9 * 2 * T90_S, "amplitude_v": 0.5},  # 162 deg: a 10 % angle error
            "echo_spacing_s": 0.06, "echoes": 16, "echo_window_s": 0.02, "phase_cycle": TWO_STEP}, loaded)
        t = np.array(result["echo_times_s"])
        trains[variant] = np.abs(result["echo_amplitudes_v"]) * np.exp(t / loaded.sample.t2_s)  # T2 decay removed
    cpmg, cp = trains["cpmg"] / trains["cpmg"][0], trains["cp"] / trains["cp"][0]
    assert cpmg.min() > 0.85, cpmg
    # in CP the error adds up: after n pulses M is turned n * 18 deg out of the transverse plane, so the
    # echoes fall as |cos(n * 18 deg)| towards nothing at n = 5 (an offset spread blurs it)
    expected = np.abs(np.cos(np.radians(18.0) * np.arange(1, 6))) / np.cos(np.radians(18.0))
    assert np.all(np.abs(cp[:4] - expected[:4]) < 0.15), cp
    assert cp[2:6].min() < 0.3 < 0.85 < cpmg[2:6].min(), cp


def test_noise_survey_gives_the_input_noise_density_and_the_mains():
    # source: Johnson, Phys. Rev. 32:97 (1928); Nyquist, Phys. Rev. 32:110 (1928): e_n = sqrt(4 k T R)
    # added in quadrature to the preamplifier's own noise
    loaded = rig(simulator={"spike_rate_per_s": 0.0})
    result, run = run_and_analyse({"name": "t", "kind": "noise", "shots": 3, "acquire_s": 2.0}, loaded)
    inst = run.rig.instrument
    resistance = inst.coil_resistance_ohm()
    expected = math.hypot(math.sqrt(4 * constants.k * (inst.coil_temperature_c + 273.15) * resistance),
                          loaded.config.receive.preamp_noise_nv_per_rthz * 1e-9)
    assert math.isclose(expected, math.hypot(johnson_noise_density_v_per_rthz(resistance, inst.coil_temperature_c),
                                             2e-9), rel_tol=1e-9)
    assert within(result["density_nv_per_rthz"] * 1e-9, expected, 0.05), (result["density_nv_per_rthz"], expected)
    assert abs(result["mains_fundamental_hz"] - inst.mains_hz(run.shots[0].started_at_s)) < 0.01
    # the simulator's odd harmonics have amplitude A/h at the input
    third = next(x for x in result["mains_lines_strongest"] if x["harmonic"] == 3)
    assert within(third["amplitude_v"], loaded.config.simulator.mains_amplitude_uv * 1e-6 / 3, 0.05)
    assert len(result["spectrum_frequencies_hz"]) == len(result["spectrum_nv_per_rthz"]) > 50


@pytest.mark.parametrize("kind", ["fid-sudden", "fid-pulse"])
def test_fid_runs_give_the_field(kind):
    # source: f = (gamma'_p / 2 pi) B, CODATA 2022 shielded proton (REFERENCE.md)
    loaded = rig()
    data = {"name": "t", "kind": "fid", "shots": 2, "polarise": POLARISE}
    if kind == "fid-pulse":
        data.update(switch_off=ADIABATIC, pulse={"duration_s": T90_S, "amplitude_v": 0.5}, phase_cycle=TWO_STEP)
    result, run = run_and_analyse(data, loaded)
    truth = run.rig.instrument.earth_field_nt(run.shots[0].started_at_s)
    assert abs(result["field_nt"] - truth) < max(0.5, 5 * result["field_sd_nt"])
