"""Echo analyses clean each shot like the FID pipeline does: hum, spikes and reference pickup removed."""

from __future__ import annotations

import dataclasses

import numpy as np

from controller.analysis.by_kind import analyse_run
from controller.analysis.mains import fit_harmonics_on_samples, harmonics_waveform
from controller.dryrun import dry_run
from controller.runner import analysis_context, predicted_larmor_hz
from controller.sequences.compile import compile_sequence
from sequence_rigs import POLARISE, START_EPOCH_S, rig, spec

T90_S = 0.0048
HAHN_SERIES = {"name": "t", "kind": "echo", "shots": 2, "polarise": POLARISE,
               "refocus": {"duration_s": 2 * T90_S, "amplitude_v": 0.5}, "echo_times_s": [0.2, 0.6, 1.1, 1.7, 2.4],
               "echo_window_s": 0.1, "phase_cycle": {"refocus_deg": [0.0, 180.0], "receiver_deg": [0.0]},
               "receive": {"dead_time_s": 0.015, "acquire_s": 1.3}}


def test_hahn_echo_series_t2_survives_hum_once_cleaned():
    # source: Hahn, Phys. Rev. 80:580 (1950): the echo height at TE decays as exp(-TE/T2) (= exp(-2 tau/T2))
    loaded = rig(simulator={"mains_amplitude_uv": 3.0})  # the demo rig's hum (60 harmonics, one near Larmor), 3x
    s = spec(HAHN_SERIES)
    timeline = compile_sequence(s, loaded.config.transceiver.sample_rate_hz, predicted_larmor_hz(loaded))
    run = dry_run(timeline, loaded, START_EPOCH_S)
    ctx = analysis_context(loaded)
    raw = analyse_run(timeline, s, run.shots, dataclasses.replace(ctx, clean=False))
    cleaned = analyse_run(timeline, s, run.shots, ctx)
    truth = loaded.sample.t2_s
    assert abs(cleaned["t2_s"] - truth) < 0.05 * truth, cleaned["t2_s"]
    assert abs(raw["t2_s"] - truth) > abs(cleaned["t2_s"] - truth), (raw["t2_s"], cleaned["t2_s"])
    assert cleaned["t2_sd_s"] < 0.5 * raw["t2_sd_s"], (raw["t2_sd_s"], cleaned["t2_sd_s"])


def test_harmonic_amplitudes_are_found_on_a_record_with_gaps():
    # source: Butler & Russell, Geophysics 58:898 (1993): h(t) = sum_m Re(c_m exp(i 2 pi m f0 t)); least squares
    # on the usable samples recovers c_m exactly for noise-free data whatever the gaps
    fs, f0 = 8000.0, 50.02
    t = np.arange(16000) / fs
    harmonics = np.arange(30, 36)
    c = np.array([1.0 - 0.5j, 0.3j, -0.2, 0.1 + 0.1j, 0.05, -0.4j])
    record = harmonics_waveform(t, f0, harmonics, c) + 0.7
    usable = (np.arange(t.size) // 400) % 3 != 0  # a pulse every 150 ms
    record_with_pulses = np.where(usable, record, 5.0)
    found = fit_harmonics_on_samples(record_with_pulses, usable, fs, f0, harmonics)
    assert np.allclose(found, c, atol=1e-9)
    direct = sum(np.real(cm * np.exp(2j * np.pi * m * f0 * t)) for m, cm in zip(harmonics, c))
    assert np.allclose(harmonics_waveform(t, f0, harmonics, c), direct, atol=1e-9)
