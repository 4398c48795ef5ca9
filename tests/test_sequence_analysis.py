"""The pure pieces behind the sequence results, checked against independent references."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.linalg import expm
from scipy.optimize import curve_fit
from scipy.signal import butter, freqz

from controller.analysis.demodulate import impulse_mask, principal_axis_projection, rotate_receiver_phase
from controller.analysis.noise import band_density, highpass_magnitude, input_referred_psd, mains_fundamental_hz
from controller.analysis.nutation import fit_nutation
from controller.analysis.relaxation import fit_exponential
from controller.calibration import PulseCalibration, load_calibration, write_calibration
from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T
from drivers.simulated import spins
from drivers.simulated.transceiver import rotating_wave_blocks

RNG = np.random.default_rng(20240601)


def test_exponential_fit_agrees_with_scipy_curve_fit():
    # source: independent reference library (scipy.optimize.curve_fit, Levenberg-Marquardt with the
    # covariance scaled by the reduced chi-square; Bevington & Robinson (2003), ch. 8)
    t = np.linspace(0.05, 3.0, 30)
    y = 0.8 * np.exp(-t / 1.6) + RNG.normal(0, 0.01, t.size)
    ours = fit_exponential(t, y)
    ref, cov = curve_fit(lambda t, a, tau: a * np.exp(-t / tau), t, y, p0=(1.0, 1.0))
    assert ours.time_constant_s == pytest.approx(ref[1], rel=1e-6)
    assert ours.amplitude == pytest.approx(ref[0], rel=1e-6)
    assert ours.time_constant_sd_s == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-3)


def test_recovery_fit_with_offset_agrees_with_scipy_curve_fit():
    # y = A_inf + (A_0 - A_inf) exp(-tp / T1), Bloch (1946); reference scipy.optimize.curve_fit
    t = np.array([0.25, 0.6, 1.0, 1.6, 2.5, 4.0, 6.5])
    y = 1.0 - 0.98 * np.exp(-t / 2.3) + RNG.normal(0, 0.005, t.size)
    ours = fit_exponential(t, y, offset=True)
    ref, cov = curve_fit(lambda t, c, a, tau: c + a * np.exp(-t / tau), t, y, p0=(1, -1, 1))
    assert (ours.offset, ours.amplitude, ours.time_constant_s) == pytest.approx(tuple(ref), rel=1e-5)
    assert ours.time_constant_sd_s == pytest.approx(math.sqrt(cov[2, 2]), rel=1e-3)


def test_exponential_fit_refuses_too_few_points():
    with pytest.raises(ValueError, match="at least 3"):
        fit_exponential([0.1, 0.2], [1.0, 0.9])


def test_nutation_fit_finds_the_90_degree_point_either_sign():
    x = np.linspace(0.001, 0.014, 10)
    for sign in (1, -1):
        y = sign * 0.7 * np.sin(np.pi / 2 * x / 0.00479) + RNG.normal(0, 0.003, x.size)
        fit = fit_nutation(x, y)
        assert fit.x90 == pytest.approx(0.00479, rel=0.01)
        assert fit.amplitude == pytest.approx(0.7, rel=0.02)


def test_principal_axis_projection_handles_alternating_signs():
    values = np.array([1.0, -0.9, 0.8, -0.7, 0.6]) * np.exp(1j * 2.2)
    signed, axis = principal_axis_projection(values)
    assert np.allclose(np.abs(signed), [1.0, 0.9, 0.8, 0.7, 0.6])
    assert signed.sum() >= 0 and np.allclose(np.abs(np.diff(np.sign(signed))), 2)


def test_rotating_wave_blocks_are_exact_for_a_sinusoid_at_the_larmor_frequency():
    # B = A cos(w0 t + phi): its co-rotating half in the frame at w0 is (A/2) exp(-i phi) (REFERENCE.md,
    # B1_rot is half the linear amplitude), whatever the block length
    fs, f0, phi = 48000.0, 2053.37, 0.7
    k = np.arange(1234, 1234 + 461)
    blocks, sizes = rotating_wave_blocks(0.5 * np.cos(2 * np.pi * f0 * k / fs + phi), 1234, fs, 2 * np.pi * f0)
    assert sizes.sum() == 461
    assert np.allclose(blocks, 0.25 * np.exp(-1j * phi), atol=1e-12)


def test_pulse_propagators_match_the_matrix_exponential_of_the_bloch_equation():
    # source: independent reference scipy.linalg.expm of dM/dt = gamma M x B (Bloch 1946) in the rotating frame
    gamma = GAMMA_SHIELDED_RAD_PER_S_T
    b1 = np.array([1.2e-6 * np.exp(-0.4j), 1.1e-6 * np.exp(-0.5j), 1.3e-6 * np.exp(-0.45j)])
    durations = np.array([1.5e-3, 1.4e-3, 1.6e-3])
    offsets = np.array([-40.0, 0.0, 25.0])
    ours = spins.pulse_propagators(b1, durations, offsets, gamma)
    for i, dw in enumerate(offsets):
        total = np.eye(3)
        for b, dt in zip(b1, durations):
            field = np.array([b.real, b.imag, dw / gamma])
            cross = np.array([[0, field[2], -field[1]], [-field[2], 0, field[0]], [field[1], -field[0], 0]])
            total = expm(gamma * cross * dt) @ total  # dM/dt = gamma M x B = gamma [B]_x^T M
        assert np.allclose(ours[i], total, atol=1e-10)


def test_envelope_recurrence_equals_the_direct_sum():
    # the uniform-grid recurrence (spins.transverse_envelope) against the plain sum over isochromats
    offsets, weights = spins.lorentzian_isochromats(2.0, 1.5)
    start = np.tile([1.0, 0.0, 0.0], (offsets.size, 1))
    t = np.linspace(0.0, 1.5, 1501)  # more rows than one chunk of the recurrence
    envelope = spins.transverse_envelope(start, offsets, weights, t, 1.6)
    direct = (np.exp(-1j * np.outer(t, offsets)) @ (weights + 0j)) * np.exp(-t / 1.6)
    assert np.allclose(envelope, direct, atol=1e-12)
    # source: the Fourier transform of a Lorentzian of half width g is exp(-g |t|) (any Fourier table)
    assert np.allclose(np.abs(envelope), np.exp(-2.0 * t - t / 1.6), atol=0.02)


def test_receiver_phase_turns_the_signal_back():
    fs = 48000.0
    k = np.arange(48000)
    s = np.cos(2 * np.pi * 2000.0 * k / fs + 1.1)
    back = rotate_receiver_phase(s, 1.1)
    middle = slice(2000, -2000)  # the analytic signal is exact away from the window's ends
    assert np.allclose(back[middle], np.cos(2 * np.pi * 2000.0 * k / fs)[middle], atol=1e-3)
    assert np.array_equal(rotate_receiver_phase(s, math.pi), -s)


def test_impulse_mask_finds_spikes_and_keeps_gaussian_noise():
    x = RNG.normal(0, 1.0, 20000)
    x[[5000, 12000]] += 40.0
    usable = impulse_mask(x, guard_samples=4)
    assert not usable[5000] and not usable[12000]
    assert usable.mean() > 0.998


def test_white_noise_density_is_recovered_input_referred():
    # one-sided white noise of density e_n has variance e_n^2 fs / 2; a first-order digital high-pass's
    # magnitude is checked against scipy.signal.freqz of the same filter (independent reference)
    fs, density, gain, corner = 48000.0, 3e-9, 20000.0, 300.0
    b, a = butter(1, corner / (fs / 2), btype="high")
    w, h = freqz(b, a, worN=[2000.0], fs=fs)
    assert abs(h[0]) == pytest.approx(highpass_magnitude(np.array([2000.0]), corner)[0], rel=2e-3)
    from scipy.signal import lfilter

    records = [lfilter(b, a, gain * RNG.normal(0, density * math.sqrt(fs / 2), 96000)) for _ in range(3)]
    spectrum = input_referred_psd(records, fs, gain, corner)
    found, sd, bins = band_density(spectrum, (1900.0, 2100.0), 50.0)
    assert found == pytest.approx(density, rel=0.04)
    assert 0 < sd < 0.03 * density and bins > 50


def test_mains_fundamental_from_many_harmonics():
    fs = 48000.0
    t = np.arange(96000) / fs
    f1 = 50.037
    hum = sum((1.0 / h) * np.cos(2 * np.pi * h * f1 * t + h) for h in range(1, 40, 2))
    estimate = mains_fundamental_hz([hum + RNG.normal(0, 0.01, t.size)], fs, 50.0)
    assert estimate == pytest.approx(f1, abs=0.002)


def test_calibration_file_round_trip_and_pulse_length(tmp_path):
    # t = theta / (gamma B1_rot): a 90 deg pulse at the calibration amplitude is the calibrated t90
    b1 = math.pi / (2 * GAMMA_SHIELDED_RAD_PER_S_T * 0.0048 * 0.5)
    cal = PulseCalibration(b1_rot_t_per_v=b1, pulse_90_s=0.0048, amplitude_v=0.5, frequency_hz=2054.3,
                           rig='heron-2 "sim"', run_id="abc", measured_at_utc="2031-06-01T18:00:00Z")
    path = tmp_path / "cal" / "heron.toml"
    write_calibration(path, cal, comment="test")
    assert load_calibration(path) == cal
    assert cal.duration_for_s(90.0, 0.5) == pytest.approx(0.0048)
    assert cal.duration_for_s(180.0, 1.0) == pytest.approx(0.0048)
