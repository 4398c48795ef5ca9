"""Sequence specs compile purely, place events exactly on the sample clock, and refuse bad specs clearly."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from controller.checks import check_all
from controller.config.loader import load_rig, load_sequence
from controller.errors import ConfigError
from controller.runner import prepare_run
from controller.sequences.building import SpecError
from controller.sequences.compile import compile_sequence
from controller.sequences.render import render_segment
from controller.sequences.timeline import Acquire, EchoCentre, Pulse
from sequence_rigs import ADIABATIC, DEMO_RIG, POLARISE, ROOT, TWO_STEP, spec

FS = 48000.0
LARMOR_HZ = 2054.3
EXAMPLES = sorted((ROOT / "configs" / "sequences").glob("*.toml"))


def compile_dict(data: dict, calibration=None):
    return compile_sequence(spec(data), FS, LARMOR_HZ, calibration=calibration)


CPMG = {"name": "t", "kind": "cpmg", "shots": 2, "polarise": POLARISE, "switch_off": ADIABATIC,
        "excite": {"duration_s": 0.0048, "amplitude_v": 0.5, "phase_deg": 30.0},
        "refocus": {"duration_s": 0.0096, "amplitude_v": 0.5}, "echo_spacing_s": 0.06, "echoes": 5,
        "echo_window_s": 0.02, "phase_cycle": TWO_STEP, "receive": {"dead_time_s": 0.01}}


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.stem)
def test_every_example_compiles_twice_to_equal_timelines(path: Path):
    loaded = load_rig(DEMO_RIG)
    first = prepare_run(str(path), loaded).timeline
    second = prepare_run(str(path), loaded).timeline
    assert first == second
    assert first.shots and all(s.segment_samples > 0 for s in first.shots)
    assert check_all(first, loaded.config) == []  # every worked example fits the demo rig's limits


def test_every_kind_has_a_worked_example():
    kinds = {load_sequence(p).kind for p in EXAMPLES}
    variants = {load_sequence(p).variant for p in EXAMPLES if load_sequence(p).kind == "cpmg"}
    assert kinds == {"fid", "echo", "cpmg", "t1-polarise", "t1-earth", "nutation", "noise"}
    assert variants == {"cpmg", "cp"}


def test_cpmg_timing_and_the_meiboom_gill_phase_shift():
    # source: Meiboom & Gill, Rev. Sci. Instrum. 29:688 (1958): refocusing pulses 90 deg out of phase with the
    # first pulse, at tau, 3 tau, 5 tau ...; echoes at 2 tau, 4 tau ... (Carr & Purcell, Phys. Rev. 94:630 (1954))
    for variant, shift in (("cpmg", 90.0), ("cp", 0.0)):
        timeline = compile_dict({**CPMG, "variant": variant})
        for shot in timeline.shots:
            excite, *refocus = shot.of_kind(Pulse)
            centre0 = excite.start_sample + excite.n_samples / 2
            tau_n = 0.03 * FS
            for k, p in enumerate(refocus):
                assert abs(p.start_sample + p.n_samples / 2 - (centre0 + (2 * k + 1) * tau_n)) <= 0.5
                assert math.isclose(math.remainder(p.phase_rad - excite.phase_rad - math.radians(shift), 2 * math.pi),
                                    0.0, abs_tol=1e-12)
            for k, echo in enumerate(shot.of_kind(EchoCentre)):
                assert abs(echo.sample - (centre0 + 2 * (k + 1) * tau_n)) <= 0.5
                assert math.isclose(echo.echo_time_s, 0.06 * (k + 1), abs_tol=0.6 / FS)
            # every receiver window opens a dead time after a refocusing pulse and holds its echo
            for window, p, echo in zip(shot.of_kind(Acquire), refocus, shot.of_kind(EchoCentre)):
                assert window.start_sample == p.start_sample + p.n_samples + int(0.01 * FS)
                assert window.start_sample < echo.sample < window.start_sample + window.n_samples
        # the phase cycle: excite 0/180 with the receiver 0/180, step by step
        steps = [(s.of_kind(Pulse)[0].phase_rad, s.of_kind(Acquire)[0].receiver_phase_rad) for s in timeline.shots]
        assert math.isclose(abs(math.remainder(steps[1][0] - steps[0][0], 2 * math.pi)), math.pi)
        assert math.isclose(abs(math.remainder(steps[1][1] - steps[0][1], 2 * math.pi)), math.pi)


def test_pulses_have_exact_phase_on_the_sample_clock():
    timeline = compile_dict(CPMG)
    shot = timeline.shots[0]
    tx = render_segment(shot, FS).tx
    for p in shot.of_kind(Pulse):
        k = np.arange(p.start_sample, p.start_sample + p.n_samples)
        assert np.allclose(tx[k], p.amplitude_v * np.cos(2 * np.pi * p.frequency_hz * k / FS + p.phase_rad), atol=1e-12)
    assert np.all(tx[shot.of_kind(Acquire)[0].start_sample:shot.of_kind(Pulse)[2].start_sample] == 0)


def test_hahn_echo_lies_at_the_echo_time_after_a_sudden_switch_off():
    # source: Hahn, Phys. Rev. 80:580 (1950): pulse at TE/2, echo at TE
    timeline = compile_dict({"name": "t", "kind": "echo", "polarise": POLARISE, "echo_times_s": [0.2, 0.5],
                             "refocus": {"duration_s": 0.0096, "amplitude_v": 0.5},
                             "receive": {"dead_time_s": 0.015, "acquire_s": 0.4}})
    assert [s.series_value for s in timeline.shots] == pytest.approx([0.2, 0.5], abs=1 / FS)
    for shot in timeline.shots:
        (off,) = [e for e in shot.events if type(e).__name__ == "SwitchOff"]
        ramp_end = off.start_sample + round(off.ramp_s * FS)
        (p,) = shot.of_kind(Pulse)
        (echo,) = shot.of_kind(EchoCentre)
        assert abs(p.start_sample + p.n_samples / 2 - ramp_end - shot.series_value * FS / 2) <= 0.5
        assert echo.sample - ramp_end == round(shot.series_value * FS)


def test_series_order_and_phase_cycle_steps():
    data = {"name": "t", "kind": "t1-earth", "shots": 2, "polarise": POLARISE, "switch_off": ADIABATIC,
            "pulse": {"duration_s": 0.0048, "amplitude_v": 0.5}, "earth_delays_s": [0.1, 1.0, 2.0],
            "phase_cycle": TWO_STEP}
    interleaved = compile_dict(data)
    assert [(s.series_index, s.cycle_step) for s in interleaved.shots] == [(0, 0), (1, 0), (2, 0), (0, 1), (1, 1), (2, 1)]
    sequential = compile_dict({**data, "order": "sequential"})
    assert [(s.series_index, s.cycle_step) for s in sequential.shots] == [(0, 0), (0, 1), (1, 0), (1, 1), (2, 0), (2, 1)]
    assert [s.series_value for s in sequential.shots[::2]] == pytest.approx([0.1, 1.0, 2.0])


def test_flip_angle_pulses_take_their_length_from_the_calibration():
    from controller.calibration import PulseCalibration

    cal = PulseCalibration(b1_rot_t_per_v=2.4537e-6, pulse_90_s=0.0047861, amplitude_v=0.5, frequency_hz=2054.0)
    data = {**CPMG, "excite": {"flip_deg": 90.0, "amplitude_v": 1.0}, "refocus": {"flip_deg": 180.0, "amplitude_v": 1.0}}
    excite, refocus = compile_dict(data, calibration=cal).shots[0].of_kind(Pulse)[:2]
    # t = theta / (gamma B1_rot): at twice the calibration amplitude a 90 deg pulse is half as long
    assert excite.n_samples == round(0.0047861 / 2 * FS)
    assert refocus.n_samples == round(0.0047861 * FS)
    with pytest.raises(SpecError, match="calibration"):
        compile_dict(data)


@pytest.mark.parametrize("change, key, words", [
    ({"echo_time_s": 0.03}, "echo_time_s", "shorter than the refocusing pulse"),
    ({"echo_time_s": 0.008}, "echo_time_s", "shorter than"),
    ({"echo_times_s": [0.2]}, "echo_times_s", "at least 2"),
    ({"echo_time_s": -0.2}, "echo_time_s", "out of range"),
    ({"echo_time_s": 0.2, "echo_times_s": [0.2, 0.4]}, "echo_time_s", "not both"),
    ({"echo_times_s": [0.2, 0.2, 0.4]}, "echo_times_s", "same value twice"),
    ({"echo_time_s": 0.2, "shots": 3, "phase_cycle": {"refocus_deg": [0.0, 180.0]}}, "shots", "multiple of 2"),
    ({"echo_time_s": 0.2, "phase_cycle": {"refocus_deg": [0.0, 180.0], "receiver_deg": [0.0, 90.0, 180.0]}},
     "phase_cycle.refocus_deg", "1 or 3"),
    ({"echo_time_s": 0.2, "receive": {"dead_time_s": -0.01}}, "receive.dead_time_s", "out of range"),
    ({"echo_time_s": 0.9, "receive": {"acquire_s": 0.1}}, "receive.acquire_s", "ends before the echo"),
])
def test_bad_echo_specs_get_a_clear_error(change, key, words, tmp_path):
    base = {"name": "t", "kind": "echo", "polarise": POLARISE, "refocus": {"duration_s": 0.0096, "amplitude_v": 0.5},
            "receive": {"dead_time_s": 0.015, "acquire_s": 0.5}}
    data = {**base, **change}
    with pytest.raises((ConfigError, SpecError)) as info:
        compile_dict(data)
    text = str(info.value)
    assert key in text and words in text, text
    assert "\n" not in text


@pytest.mark.parametrize("kind, change, words", [
    ("cpmg", {"echo_spacing_s": 0.03}, "shorter than the refocusing pulse"),
    ("cpmg", {"echoes": 1}, "out of range"),
    ("t1-polarise", {"polarise_times_s": [1.0]}, "at least 2"),
    ("t1-polarise", {"polarise_times_s": [1.0, -2.0]}, "out of range"),
    ("t1-earth", {"earth_delays_s": [0.5]}, "at least 2"),
    ("nutation", {"pulse_lengths_s": [0.001, 0.002]}, "at least 3"),
    ("nutation", {"pulse_amplitudes_v": [0.1, 0.2, 0.3]}, "duration_s"),
    ("noise", {"band_hz": [2100.0, 2000.0]}, "low < high"),
    ("fid", {"phase_cycle": {"receiver_deg": [0.0, 180.0]}, "shots": 2}, "needs a pulse"),
])
def test_bad_specs_of_other_kinds_get_a_clear_error(kind, change, words):
    base = {
        "cpmg": CPMG,
        "t1-polarise": {"name": "t", "kind": kind, "polarise": {"current_a": 2.0}, "polarise_times_s": [0.5, 1.0]},
        "t1-earth": {"name": "t", "kind": kind, "polarise": POLARISE, "pulse": {"duration_s": 0.0048, "amplitude_v": 0.5},
                     "earth_delays_s": [0.1, 1.0]},
        "nutation": {"name": "t", "kind": kind, "polarise": POLARISE, "pulse": {"amplitude_v": 0.5},
                     "pulse_lengths_s": [0.001, 0.002, 0.004]},
        "noise": {"name": "t", "kind": kind},
        "fid": {"name": "t", "kind": kind, "polarise": POLARISE},
    }[kind]
    data = {**base, **change}
    if kind == "nutation" and "pulse_amplitudes_v" in change:
        data.pop("pulse_lengths_s")
    with pytest.raises((ConfigError, SpecError)) as info:
        compile_dict(data)
    assert words in str(info.value), str(info.value)


def test_a_bad_sequence_file_is_one_line_naming_file_and_key(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text('name = "x"\nkind = "cpmg"\necho_spacing_s = 0.02\nechoes = 10\n'
                    '[polarise]\ncurrent_a = 2.0\nduration_s = 2.0\n'
                    '[excite]\nduration_s = 0.0048\namplitude_v = 0.5\n'
                    '[refocus]\nduration_s = 0.0096\namplitude_v = 0.5\n')
    with pytest.raises(ConfigError) as info:
        prepare_run(str(path), load_rig(DEMO_RIG))
    assert str(info.value).startswith(f"{path}: echo_spacing_s: 0.02 s is shorter than")


def test_checks_refuse_with_numbers_and_limits():
    from sequence_rigs import rig

    loaded = rig(limits={"min_dead_time_s": 0.03, "max_transmit_duty_cycle": 0.1, "max_segment_samples": 100_000})
    timeline = compile_dict({**CPMG, "echoes": 40})
    found = {v.check: v for v in check_all(timeline, loaded.config)}
    dead = found["receiver dead time"]
    assert dead.value == pytest.approx(0.01) and dead.limit == 0.03
    assert "below the minimum 0.03 s" in str(dead)
    assert found["refocusing pulse end to echo"].value == pytest.approx(0.03 - 0.0048, abs=1 / FS)
    duty = found["transmitter duty cycle"]
    expected = (0.0048 + 40 * 0.0096) / (timeline.shots[0].segment_samples / FS)
    assert duty.value == pytest.approx(expected, rel=1e-3) and duty.limit == 0.1
    assert found["acquisition buffer"].value == timeline.shots[0].segment_samples
