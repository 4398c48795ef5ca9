"""Curie law, solenoid field, reciprocity and Johnson noise against published formulas and REFERENCE.md's worked example."""

import math

import numpy as np
import pytest
from scipy import constants, integrate

from controller.physics import coil, magnetisation


def test_water_proton_density_at_20c():
    # source: REFERENCE.md [calc] N = 6.674e28 /m^3 (water 998.2 kg/m^3, CRC Handbook density table)
    assert magnetisation.water_proton_density_per_m3(20.0) == pytest.approx(6.674e28, rel=1e-3)


@pytest.mark.parametrize("field_t, expected", [(50e-6, 1.64e-7), (20e-3, 6.56e-5)])
def test_curie_law_worked_values(field_t, expected):
    # source: Curie law M0 = N gamma^2 hbar^2 I(I+1) B / (3kT) (Abragam 1961); values REFERENCE.md [calc] at 293.15 K
    m0 = magnetisation.curie_magnetisation_a_per_m(field_t, 20.0, 6.674e28)
    assert m0 == pytest.approx(expected, rel=5e-3)


def test_curie_law_independent_form():
    # source: high-temperature limit of the Brillouin function, M0 = N mu^2 B / (kT) with mu = gamma hbar / 2 (Kittel, ISSP ch. 11)
    gamma = constants.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 2 * math.pi * 1e6
    mu = gamma * constants.hbar / 2
    expected = 6.674e28 * mu**2 * 0.02 / (constants.k * 293.15)
    assert magnetisation.curie_magnetisation_a_per_m(0.02, 20.0, 6.674e28) == pytest.approx(expected, rel=1e-12)


def test_buildup_follows_t1():
    # source: Bloch (1946): M(t) = M0 (1 - exp(-t/T1))
    assert magnetisation.polarisation_buildup(2.3, 2.3) == pytest.approx(1 - math.exp(-1))


def test_awg_diameters_astm_b258():
    # source: ASTM B258 table (inches, rounded to 0.0001 in): AWG 20 0.0320, AWG 14 0.0641, AWG 36 0.0050 exactly
    inch = 0.0254
    assert coil.awg_diameter_m(20) == pytest.approx(0.0320 * inch, abs=0.00005 * inch)
    assert coil.awg_diameter_m(14) == pytest.approx(0.0641 * inch, abs=0.00005 * inch)
    assert coil.awg_diameter_m(36) == pytest.approx(0.0050 * inch, rel=1e-9)


def test_copper_resistance_per_km_iec_60028():
    # source: IEC 60028 resistivity 1/58 ohm mm^2/m; ohm/km for AWG 20 = 33.31 (REFERENCE.md [calc])
    r = coil.copper_resistance_ohm(1000.0, coil.awg_diameter_m(20))
    assert r == pytest.approx(33.31, rel=1e-3)


def _biot_savart_axis_field(turns, radius, length, z, current=1.0):
    """Numerical Biot-Savart: sum of circular loops along the winding, each integrated around its circumference."""
    mu0 = constants.mu_0
    zs = (np.arange(turns) + 0.5) / turns * length - length / 2

    def loop_bz(z_loop):
        # dB_z = mu0 I / (4 pi) * (a dphi * a) / r^3, r^2 = a^2 + (z - z_loop)^2, integrated over phi
        integrand = lambda phi: mu0 * current / (4 * math.pi) * radius**2 / (radius**2 + (z - z_loop) ** 2) ** 1.5
        return integrate.quad(integrand, 0.0, 2 * math.pi)[0]

    return sum(loop_bz(zl) for zl in zs)


@pytest.mark.parametrize("z", [0.0, 0.03, 0.08])
def test_finite_solenoid_against_biot_savart(z):
    # source: Biot-Savart law integrated numerically over the same 500 discrete turns
    analytic = coil.solenoid_axial_field_per_amp_t(500, 0.04, 0.1, z)
    numeric = _biot_savart_axis_field(500, 0.04, 0.1, z)
    assert analytic == pytest.approx(numeric, rel=2e-3)


def test_worked_example_field_emf_noise():
    # source: REFERENCE.md worked example [calc]: 500 turns, r 40 mm, l 100 mm -> B1/i 4.91 mT/A,
    # 20 mT polarisation, 0.5 L water, 50 uT -> emf0 2.16 uV; R 4.36 ohm -> e_n 0.266 nV/sqrt(Hz)
    b1 = coil.solenoid_axial_field_per_amp_t(500, 0.04, 0.1)
    assert b1 == pytest.approx(4.91e-3, rel=2e-3)
    m0 = magnetisation.curie_magnetisation_a_per_m(20e-3, 20.0, 6.674e28)
    f = 0.04257638543 * 50_000
    emf = magnetisation.reciprocity_emf_v(f, b1, m0, 0.5e-3)
    assert emf == pytest.approx(2.16e-6, rel=5e-3)
    assert magnetisation.johnson_noise_density_v_per_rthz(4.36, 20.0) == pytest.approx(0.266e-9, rel=5e-3)


def test_resistance_temperature_inversion():
    # source: R(T) = R0 (1 + alpha (T - T0)), alpha 0.00393/K (from memory); +10 % R is +25 K (REFERENCE.md [calc])
    assert coil.temperature_from_resistance_c(1.10, 1.0) - 20.0 == pytest.approx(25.45, abs=0.01)
