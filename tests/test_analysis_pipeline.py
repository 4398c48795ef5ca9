"""Pipeline steps on synthetic records: blanking, reference cancellation, stacking, detection, purity."""

import math

import numpy as np
import pytest

from controller.analysis.blanking import find_usable_start
from controller.analysis.pipeline import AnalysisOptions, ShotData, analyse_shots
from controller.analysis.stack import stack_aligned
from controller.analysis.synthetic import SyntheticSpec, fid, make_record

FS = 48000.0


def test_ringing_is_blanked_until_it_is_below_the_noise():
    # ringing 300 sigma, tau 2 ms: it falls to 1 sigma after tau ln(300) = 11.4 ms [calc]
    spec = SyntheticSpec(amplitude=1.0, ringing_amplitude=300.0, ringing_decay_s=0.002)
    x = make_record(spec, 1)[0]
    blank = find_usable_start(x, 0, FS)
    assert blank.reason == "ringing"
    assert 0.0114 <= blank.start_sample / FS <= 0.03


def test_clipped_start_is_blanked():
    spec = SyntheticSpec(amplitude=0.01, noise_sd=0.01, ringing_amplitude=5.0, ringing_decay_s=0.003)
    x = np.clip(make_record(spec, 2)[0], -1.0, 1.0)
    blank = find_usable_start(x, 0, FS, full_scale=1.0)
    assert blank.overload_end_sample is not None
    last_clip = np.flatnonzero(np.abs(x) >= 0.999)[-1]
    assert blank.start_sample > last_clip


def test_clean_start_is_not_blanked():
    spec = SyntheticSpec(amplitude=5.0, t2star_s=0.05, mains_hz=50.0, mains_amplitude=40.0)
    x = make_record(spec, 3)[0]
    assert find_usable_start(x, 0, FS).start_sample == 0


def test_reference_channel_cancels_correlated_interference():
    # source for the method: Mueller-Petke & Costabel, Near Surface Geophysics 12:199 (2014)
    spec = SyntheticSpec(amplitude=1.0, t2star_s=0.5, interference_sd=20.0, reference_noise_sd=0.05)
    shot = ShotData(make_record(spec, 4), FS, ("signal", "reference"))
    alone = analyse_shots([shot], AnalysisOptions())
    with_ref = analyse_shots([shot], AnalysisOptions(reference_channels=(1,)))
    assert with_ref.detected
    assert with_ref.frequency_sd_hz < alone.frequency_sd_hz / 5
    assert abs(with_ref.frequency_hz - spec.frequency_hz) < 4 * with_ref.frequency_sd_hz


def test_shots_with_different_phases_add_up():
    # each shot's FID starts at another phase: the joint fit and the aligned stack keep the amplitude
    shots, traces, phases = [], [], []
    for k, phase in enumerate((0.0, 2.0, 4.0)):
        spec = SyntheticSpec(amplitude=1.0, noise_sd=1.0, phase_rad=phase, t2star_s=0.3)
        samples = make_record(spec, 10 + k)
        shots.append(ShotData(samples[:1], FS, ("signal",)))
        traces.append(fid(spec.times_s(), spec.frequency_hz, spec.t2star_s, 1.0, phase))
        phases.append(phase)
    result = analyse_shots(shots)
    assert result.detected and result.shots == 3
    assert result.amplitude == pytest.approx(1.0, abs=4 * result.amplitude_sd)
    single = analyse_shots(shots[:1])
    assert result.frequency_sd_hz < single.frequency_sd_hz / math.sqrt(2)
    stacked = stack_aligned(traces, phases)
    assert np.max(np.abs(stacked[100:1000])) == pytest.approx(1.0, rel=0.02)
    assert np.max(np.abs(np.mean(traces, axis=0))) < 0.5  # a plain mean would cancel


def test_noise_only_is_not_detected():
    spec = SyntheticSpec(amplitude=0.0, mains_hz=50.0, mains_amplitude=30.0)
    for seed in range(5):
        result = analyse_shots([ShotData(make_record(spec, 20 + seed)[:1], FS, ("signal",))])
        assert not result.detected
        assert result.as_dict()["frequency_hz"] is None


def test_weak_line_is_detected():
    # amplitude 0.1 sigma at 48 kHz over 1 s with T2* 0.5 s: matched-filter SNR about 11 [calc]
    spec = SyntheticSpec(amplitude=0.1, t2star_s=0.5)
    result = analyse_shots([ShotData(make_record(spec, 30)[:1], FS, ("signal",))])
    assert result.detected
    assert abs(result.frequency_hz - spec.frequency_hz) < 4 * result.frequency_sd_hz


def test_inputs_are_not_modified():
    spec = SyntheticSpec(amplitude=1.0, mains_hz=50.0, mains_amplitude=10.0, spike_rate_per_s=3.0,
                         spike_amplitude=30.0, ringing_amplitude=100.0)
    samples = make_record(spec, 5)
    copy = samples.copy()
    samples.setflags(write=False)
    analyse_shots([ShotData(samples, FS, ("signal", "reference"))], AnalysisOptions(reference_channels=(1,)),
                  display=True)
    np.testing.assert_array_equal(samples, copy)
