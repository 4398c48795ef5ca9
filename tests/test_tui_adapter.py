"""The TUI's analysis adapter: envelope, spectrum, mains marks, fit and stack."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy import constants
from scipy.signal import hilbert

from controller.records import ShotAcquired
from controller.tui.adapter import (
    ENVELOPE_SMOOTHING_S, LiveStack, amplitude_spectrum, demodulated_envelope, fit_window, mains_harmonics_hz, minmax_reduce,
)

FS = 48000.0


def damped(a_v=0.01, f_hz=2055.3, t2_s=0.8, phi=0.4, n=48000, offset_s=0.015):
    t = offset_s + np.arange(n) / FS
    return t, a_v * np.exp(-t / t2_s) * np.cos(2 * np.pi * f_hz * t + phi)


def test_envelope_is_a_exp_minus_t_over_t2_and_matches_the_analytic_signal():
    t, y = damped()
    envelope = demodulated_envelope(y, FS, reference_hz=2055.0)  # 0.3 Hz off, as a first guess may be
    truth = 0.01 * np.exp(-t / 0.8)
    middle = slice(4800, 43200)  # away from the ends
    assert envelope[middle] == pytest.approx(truth[middle], rel=0.01)
    # independent reference: |analytic signal| (scipy.signal.hilbert; Gabor, J. IEE 93:429 (1946))
    assert envelope[middle] == pytest.approx(np.abs(hilbert(y))[middle], rel=0.01)


def test_envelope_gain_off_the_reference_is_the_gaussian_response():
    # source: the Fourier transform of a Gaussian of sigma s is exp(-(2 pi f s)^2 / 2)
    t, y = damped(t2_s=1e6)
    offset_hz = 1.3
    envelope = demodulated_envelope(y, FS, reference_hz=2055.3 - offset_hz)
    expected = math.exp(-((2 * math.pi * offset_hz * ENVELOPE_SMOOTHING_S) ** 2) / 2)
    assert np.median(envelope[12000:36000]) / 0.01 == pytest.approx(expected, rel=2e-3)


def test_hann_amplitude_spectrum_reads_the_amplitude_of_a_bin_centred_sine():
    # source: F. J. Harris, Proc. IEEE 66:51 (1978): Hann coherent gain 0.5
    n = 4800
    f = 100 * FS / n  # exactly on bin 100
    y = 0.003 * np.cos(2 * np.pi * f * np.arange(n) / FS)
    freqs, amps = amplitude_spectrum(y, FS, pad=1)
    assert freqs[np.argmax(amps)] == pytest.approx(f)
    assert amps.max() == pytest.approx(0.003, rel=1e-6)


def test_mains_harmonics_in_a_window():
    assert mains_harmonics_hz(1935.0, 2175.0, 50.0) == (1950.0, 2000.0, 2050.0, 2100.0, 2150.0)
    assert mains_harmonics_hz(1935.0, 2175.0, 60.0) == (1980.0, 2040.0, 2100.0, 2160.0)


def test_minmax_reduce_keeps_extremes():
    y = np.random.default_rng(3).standard_normal(100000)
    t = np.arange(y.size) / FS
    t2, y2 = minmax_reduce(t, y, bins=500)
    assert y2.size == 1000 and y2.max() == y.max() and y2.min() == y.min()


def test_fit_converts_with_codata_gamma_and_its_scatter_is_near_the_cramer_rao_bound():
    rng = np.random.default_rng(11)
    a_v, f_hz, sigma_v = 0.01, 2055.3, 0.004
    t, clean = damped(a_v=a_v, f_hz=f_hz, t2_s=100.0, n=24000)
    fits = [fit_window(clean + sigma_v * rng.standard_normal(t.size), FS, 0.015, 1, (1900.0, 2200.0))
            for _ in range(30)]
    # source: CODATA 2022 shielded proton gyromagnetic ratio (scipy.constants)
    gamma_hz_per_nt = constants.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e-3
    for fit in fits:
        assert fit.field_nt == pytest.approx(fit.frequency_hz / gamma_hz_per_nt, rel=1e-9)
    # source: Rife & Boorstyn, IEEE Trans. IT-20:591 (1974): var(omega) = 24 s^2 / (A^2 dt^2 N (N^2 - 1));
    # the scatter of 30 estimates has a ~13 % standard error, hence the 25 % tolerance
    n, dt = t.size, 1 / FS
    crb_hz = math.sqrt(24 * sigma_v**2 / (a_v**2 * dt**2 * n * (n**2 - 1))) / (2 * math.pi)
    frequencies = np.array([f.frequency_hz for f in fits])
    assert abs(frequencies.mean() - f_hz) < 3 * crb_hz / math.sqrt(len(fits))
    assert np.std(frequencies, ddof=1) == pytest.approx(crb_hz, rel=0.25)
    assert np.mean([f.frequency_sd_hz for f in fits]) == pytest.approx(crb_hz, rel=0.25)
    # SNR = A / sigma for one shot, and its stated sd agrees with its scatter (common practice, no source)
    snr = np.array([f.snr for f in fits])
    assert snr.mean() == pytest.approx(a_v / sigma_v, rel=0.1)
    assert np.std(snr, ddof=1) == pytest.approx(np.mean([f.snr_sd for f in fits]), rel=0.35)


def _shot(run_id, index, signal, bad=False):
    samples = np.zeros((2, 1000 + signal.size))
    samples[0, 1000:] = signal
    samples.setflags(write=False)
    return ShotAcquired(run_id=run_id, shot_index=index, started_at_s=100.0 + index, sample_rate_hz=FS,
                        channel_names=("signal", "reference"), samples=samples, switch_off_sample=240,
                        acquire_start_sample=1000, acquire_samples=signal.size, dead_time_s=0.015, latency_samples=0,
                        bad=bad)


def test_stack_is_the_mean_of_good_shots_and_noise_falls_as_one_over_root_n():
    # source: averaging N independent noise records divides the rms by sqrt(N) (any statistics text)
    rng = np.random.default_rng(5)
    _, clean = damped(n=12000)
    stack = LiveStack(mains_hz=50.0, larmor_guess_hz=2055.0)
    noise = [0.02 * rng.standard_normal(clean.size) for _ in range(16)]
    for i, nz in enumerate(noise):
        views = stack.add(_shot("r1", i, clean + nz), views=i == len(noise) - 1)
    stack.add(_shot("r1", 16, np.full(clean.size, 5.0), bad=True))  # left out
    assert stack.count == 16
    mean = stack.sum_v / stack.count
    assert np.std(mean - clean) == pytest.approx(0.02 / 4, rel=0.05)
    assert views.fit is not None and views.fit.shots == 16
    assert abs(views.fit.frequency_hz - 2055.3) < 5 * views.fit.frequency_sd_hz
    assert views.shot_spectrum.mains_harmonics_hz[0] % 50.0 == 0.0
    assert stack.add(_shot("r2", 0, clean)).shots_stacked == 1  # a new run starts a new stack


def test_views_are_not_computed_when_asked_to_skip():
    _, clean = damped(n=6000)
    stack = LiveStack()
    assert stack.add(_shot("r", 0, clean), views=False) is None
    assert stack.count == 1
