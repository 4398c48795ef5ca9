"""Model-based mains-hum removal: the fundamental to mHz, >= 40 dB of hum gone, the FID kept."""

import numpy as np
import pytest

from controller.analysis.pipeline import AnalysisOptions, ShotData, analyse_shots, joint_fit, prepare_shot
from controller.analysis.linefit import ShotSpectrum, fit_line
from controller.analysis.mains import subtract_mains
from controller.analysis.synthetic import SyntheticSpec, fid, make_record

FS = 48000.0


def _hum_record(frequency_hz: float, seed: int = 3):
    spec = SyntheticSpec(frequency_hz=frequency_hz, amplitude=1.0, t2star_s=0.5, noise_sd=0.01, mains_hz=50.0137,
                         mains_amplitude=40.0, mains_harmonics=60)
    with_hum = make_record(spec, seed)[0]
    spec_clean = SyntheticSpec(frequency_hz=frequency_hz, amplitude=1.0, t2star_s=0.5, noise_sd=0.01)
    without_hum = make_record(spec_clean, seed)[0]  # same seed: same noise, same FID
    return spec, with_hum, without_hum


def test_hum_removed_by_40_db_and_fid_amplitude_kept():
    # source: Butler & Russell, Geophysics 58:898 (1993): subtracting a fitted harmonic model
    # removes the hum without notching the signal; the targets (>= 40 dB, 1 %) are the issue's
    spec, x, clean = _hum_record(2073.0)
    prepared = prepare_shot(ShotData(x[None, :], FS, ("signal",)), AnalysisOptions())
    fit, mains = joint_fit([prepared])
    cleaned = subtract_mains(prepared.window, FS, mains[0])
    hum = x - clean
    removal_db = 10 * np.log10(np.sum(hum**2) / np.sum((cleaned - clean) ** 2))
    assert removal_db >= 40.0
    # the FID's amplitude survives: fit it again on the cleaned record with no mains model
    again = fit_line([ShotSpectrum(np.fft.rfft(cleaned), cleaned.size, FS, prepared.start_s)], 2073.0)
    assert again.amplitude == pytest.approx(1.0, rel=0.01)
    assert fit.amplitude == pytest.approx(1.0, rel=0.01)


def test_line_next_to_a_harmonic_keeps_its_amplitude_and_frequency():
    # the 41st harmonic of 50.0137 Hz lies at 2050.56 Hz, 1.24 Hz from the line: the joint fit
    # of line and harmonic (not a notch) keeps both; source for the approach: Butler & Russell (1993)
    spec, x, _ = _hum_record(2051.8)
    result = analyse_shots([ShotData(x[None, :], FS, ("signal",))])
    assert result.detected and 41 in result.near_harmonics
    assert result.amplitude == pytest.approx(1.0, rel=0.01)
    assert abs(result.frequency_hz - 2051.8) < 4 * result.frequency_sd_hz
    assert abs(result.mains_hz - 50.0137) < 1e-3  # to the mHz


def test_no_hum_means_no_mains_model():
    spec = SyntheticSpec(amplitude=1.0)
    result = analyse_shots([ShotData(make_record(spec, 2)[:1], FS, ("signal",))])
    assert result.mains_hz is None and result.near_harmonics == ()


def test_sixty_hertz_is_found_automatically():
    # 60 Hz grids: the 34th harmonic at 2040.3 Hz, 11 Hz from the line
    spec = SyntheticSpec(frequency_hz=2051.3, amplitude=1.0, mains_hz=60.009, mains_amplitude=30.0, mains_harmonics=50)
    result = analyse_shots([ShotData(make_record(spec, 4)[:1], FS, ("signal",))])
    assert abs(result.mains_hz - 60.009) < 2e-3
    assert abs(result.frequency_hz - 2051.3) < 4 * result.frequency_sd_hz


def test_fid_helper_is_the_textbook_form():
    t = np.array([0.0, 0.5])
    assert fid(t, 1.0, 0.5, 2.0, 0.0) == pytest.approx([2.0, 2.0 * np.exp(-1.0) * np.cos(np.pi)])
