"""Cramer-Rao bounds against closed forms, and the fit's covariance against the bound."""

import math

import numpy as np
import pytest

from controller.analysis import crb
from controller.analysis.linefit import ShotSpectrum, fit_line
from controller.physics import precision


def test_undamped_bound_matches_rife_boorstyn():
    # source: Rife & Boorstyn, IEEE Trans. IT-20:591 (1974); real-sinusoid form in Kay,
    # Fundamentals of Statistical Signal Processing I (1993), eq. 3.41:
    # var(omega) >= 24 sigma^2 / (A^2 dt^2 N (N^2 - 1))
    fs, n, amplitude, sigma = 8000.0, 4000, 0.7, 0.3
    t = crb.sample_times_s(n, fs)
    numeric = crb.crb_covariance(crb.undamped_sine_jacobian(t, 1234.5, amplitude, 0.8), sigma)
    closed = precision.undamped_frequency_crb_sd_hz(amplitude, sigma, 1.0 / fs, n)
    assert math.sqrt(numeric[0, 0]) == pytest.approx(closed, rel=2e-3)


def test_damped_bound_matches_closed_form():
    # source: REFERENCE.md "Estimation limits": var(omega) >= (2 sigma^2/A^2) S0/(S0 S2 - S1^2),
    # S_k = sum t^k exp(-2 t / T2*) (Yao & Pandit, IEEE Trans. SP 43 (1995), from memory)
    fs, n, sigma = 48000.0, 24000, 2.0
    t = crb.sample_times_s(n, fs)
    numeric = crb.frequency_crb_sd_hz(t, 2050.0, 1 / 0.3, 1.0, 0.4, sigma)
    density = sigma / math.sqrt(fs / 2)  # sigma^2 = e_n^2 fs / 2
    closed = precision.frequency_crb_sd_hz(1.0, density, fs, n / fs, t2star_s=0.3)
    assert numeric == pytest.approx(closed, rel=1e-3)


def test_nuisance_harmonic_next_to_the_line_raises_the_bound():
    # source: the Fisher information of the full model (Kay 1993, ch. 3): nuisance parameters
    # coupled to f can only raise var(f)
    fs, n = 48000.0, 48000
    t = crb.sample_times_s(n, fs)
    alone = crb.frequency_crb_sd_hz(t, 2051.6, 1.0, 1.0, 0.4, 1.0)
    hum = crb.mains_jacobian(t, 50.003, np.array([41]), np.array([1.0 + 0j]))
    joint = crb.frequency_crb_sd_hz(t, 2051.6, 1.0, 1.0, 0.4, 1.0, hum)
    assert joint > alone * 1.001


def test_fit_covariance_reaches_the_bound():
    # source: Cramer-Rao bound (Kay 1993, ch. 3); a maximum-likelihood fit's covariance
    # at high SNR equals the inverse Fisher information
    fs, n, amplitude, sigma, t2 = 48000.0, 48000, 1.0, 1.0, 0.3
    t = crb.sample_times_s(n, fs)
    rng = np.random.default_rng(5)
    x = amplitude * np.exp(-t / t2) * np.cos(2 * np.pi * 2051.3 * t + 0.4) + rng.normal(0, sigma, n)
    fit = fit_line([ShotSpectrum(np.fft.rfft(x), n, fs, 0.0)], 2051.0)
    bound = crb.full_model_crb_sd(t, 2051.3, 1 / t2, amplitude, 0.4, sigma)
    assert fit.frequency_sd_hz == pytest.approx(bound["frequency_sd_hz"], rel=0.1)
    assert fit.t2star_sd_s == pytest.approx(bound["t2star_sd_s"], rel=0.1)
    assert abs(fit.frequency_hz - 2051.3) < 4 * bound["frequency_sd_hz"]
