"""Sequence compilation is pure, deterministic and sample-locked."""

import dataclasses

import numpy as np

from controller.config.loader import load_sequence
from controller.sequences.compile import compile_sequence
from controller.sequences.render import render_segment
from controller.sequences.timeline import Acquire, Pulse, SwitchOff

from tests.conftest import FID_ADIABATIC, FID_SUDDEN


def test_compiling_twice_gives_equal_timelines():
    spec = load_sequence(FID_ADIABATIC)
    assert compile_sequence(spec, 48000.0, 2054.0) == compile_sequence(spec, 48000.0, 2054.0)


def test_event_times_are_whole_sample_periods():
    spec = dataclasses.replace(load_sequence(FID_ADIABATIC), shots=2)
    fs = 44100.0
    timeline = compile_sequence(spec, fs, 2054.0)
    for shot in timeline.shots:
        for event in shot.events:
            n = event.start_s * fs
            assert abs(n - round(n)) < 1e-6, event
        (pulse,) = shot.of_kind(Pulse)
        assert abs(pulse.start_s - (shot.segment_start_s + pulse.start_sample / fs)) < 1e-12


def test_render_places_pulse_with_exact_phase():
    spec = load_sequence(FID_ADIABATIC)
    timeline = compile_sequence(spec, 48000.0, 2054.0)
    shot = timeline.shots[0]
    wave = render_segment(shot, 48000.0)
    (pulse,) = shot.of_kind(Pulse)
    k = pulse.start_sample
    assert wave.tx[k - 1] == 0.0 and wave.tx[k + pulse.n_samples] == 0.0
    t = k / 48000.0
    assert wave.tx[k] == np.float64(0.5 * np.cos(2 * np.pi * 2054.0 * t))
    (off,) = shot.of_kind(SwitchOff)
    assert wave.gate[off.start_sample - 1] == 1.0 and wave.gate[-1] == 0.0


def test_sudden_fid_acquires_after_dead_time():
    spec = load_sequence(FID_SUDDEN)
    timeline = compile_sequence(spec, 48000.0)
    shot = timeline.shots[0]
    (off,) = shot.of_kind(SwitchOff)
    (acq,) = shot.of_kind(Acquire)
    ramp_end = off.start_sample + round(off.ramp_s * 48000)
    assert (acq.start_sample - ramp_end) / 48000.0 == spec.receive.dead_time_s
    assert acq.n_samples == 48000
    assert len(timeline.shots) == spec.shots
