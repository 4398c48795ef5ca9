"""Site field and Larmor frequency against NOAA's WMM2025 test values and CODATA 2022."""

from __future__ import annotations

import datetime as dt
import math

import pytest
from scipy import constants as sc

from controller.errors import InputError
from controller.physics.constants import GAMMA_FREE_HZ_PER_T, GAMMA_SHIELDED_HZ_PER_T, larmor_frequency_hz
from controller.physics.geomag import igrf_field, parse_date
from controller.physics.magnetisation import adiabatic_rate_t_per_s
from controller.physics.mains import nearest_harmonic

# source: NOAA WMM2025 published test values (REFERENCE.md): 2025.0, height 0 km, (lat, lon, X, Y, Z) in nT
WMM2025_TEST_VALUES = [
    (80.0, 0.0, 6521.6, 145.9, 54791.5),
    (0.0, 120.0, 39677.8, -109.6, -10580.2),
    (-80.0, 240.0, 6117.5, 15751.9, -52022.5),
]


@pytest.mark.parametrize("lat, lon, x, y, z", WMM2025_TEST_VALUES)
def test_igrf_total_field_agrees_with_wmm2025_test_values(lat, lon, x, y, z):
    # source: NOAA WMM2025 test values; IGRF-14 and WMM2025 are separate models that differ by up to ~10 nT
    field = igrf_field(lat, lon, 0.0, dt.date(2025, 1, 1))
    assert field.total_nt == pytest.approx(math.sqrt(x * x + y * y + z * z), abs=10.0)
    # The components differ by up to 11.8 nT (Y at -80, 240): compare them no tighter than 15 nT.
    assert field.north_nt == pytest.approx(x, abs=15.0)
    assert field.east_nt == pytest.approx(y, abs=15.0)
    assert field.down_nt == pytest.approx(z, abs=15.0)
    # inclination and declination follow from the same components
    assert field.inclination_deg == pytest.approx(math.degrees(math.atan2(z, math.hypot(x, y))), abs=0.05)
    assert field.declination_deg == pytest.approx(math.degrees(math.atan2(y, x)), abs=0.2)


def test_codata_2022_gyromagnetic_ratios():
    # source: CODATA 2022 via scipy.constants (scipy >= 1.15)
    assert GAMMA_SHIELDED_HZ_PER_T == pytest.approx(42.57638543e6, rel=1e-10)
    assert GAMMA_FREE_HZ_PER_T == pytest.approx(42.577478461e6, rel=1e-10)
    assert GAMMA_SHIELDED_HZ_PER_T == sc.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e6
    # source: REFERENCE.md [calc]: f = 2128.82 Hz at 50 uT
    assert larmor_frequency_hz(50000.0) == pytest.approx(2128.82, abs=0.005)


def test_adiabatic_rate_at_50_microtesla():
    # source: REFERENCE.md [calc]: gamma Be^2 = 0.67 T/s at 50 uT
    assert adiabatic_rate_t_per_s(50e-6) == pytest.approx(0.67, abs=0.005)


def test_nearest_mains_harmonics_of_the_50_microtesla_line():
    # source: [calc] 2128.82 Hz: 43 x 50 = 2150 Hz is 21.18 Hz above; 35 x 60 = 2100 Hz is 28.82 Hz below
    f = larmor_frequency_hz(50000.0)
    h50, h60 = nearest_harmonic(f, 50.0), nearest_harmonic(f, 60.0)
    assert (h50.harmonic, h50.offset_hz, h50.other_side_hz) == (43, pytest.approx(-21.18, abs=0.01), 2100.0)
    assert (h60.harmonic, h60.offset_hz, h60.other_side_hz) == (35, pytest.approx(28.82, abs=0.01), 2160.0)
    # source: REFERENCE.md "Noise": a 0.1 Hz drift moves the 40th harmonic 4 Hz
    assert nearest_harmonic(2000.0, 50.0).shift_hz_per_grid_hz() * 0.1 == pytest.approx(4.0)


@pytest.mark.parametrize("args, words", [
    ((95.0, 0.0, 0.0, dt.date(2025, 1, 1)), "latitude 95 is out of range; allowed: -90 to 90"),
    ((0.0, 400.0, 0.0, dt.date(2025, 1, 1)), "longitude 400 is out of range"),
    ((0.0, 0.0, -5000.0, dt.date(2025, 1, 1)), "altitude -5000 m is out of range"),
    ((0.0, 0.0, 0.0, dt.date(2030, 1, 2)), "outside IGRF-14's validity; allowed: 1900-01-01 to 2030-01-01"),
    ((0.0, 0.0, 0.0, dt.date(1899, 12, 31)), "outside IGRF-14's validity"),
])
def test_positions_and_dates_outside_the_model_are_refused(args, words):
    with pytest.raises(InputError, match=words):
        igrf_field(*args)


def test_a_date_that_is_not_a_date_is_refused():
    with pytest.raises(InputError, match="allowed: YYYY-MM-DD"):
        parse_date("2025-02-30")
