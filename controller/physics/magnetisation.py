"""Nuclear magnetisation and the signal it induces.

* Curie law for spin 1/2: M0 = N gamma^2 hbar^2 I (I + 1) B / (3 k T)
  [Abragam 1961; Hoult & Richards 1976].
* Build-up: M(tp) = M0 (1 - exp(-tp / T1)) [Bloch 1946].
* EMF by reciprocity: emf0 = omega0 (B1 / i) M_perp V_sample [Hoult & Richards 1976].
* Johnson noise density e_n = sqrt(4 k T R) [Johnson 1928; Nyquist 1928].
"""

from __future__ import annotations

import math

from controller.physics.constants import (
    AVOGADRO_PER_MOL,
    BOLTZMANN_J_PER_K,
    GAMMA_SHIELDED_RAD_PER_S_T,
    HBAR_J_S,
)

WATER_MOLAR_MASS_KG_PER_MOL: float = 18.01528e-3
KELVIN_OFFSET: float = 273.15


def water_density_kg_per_m3(temperature_c: float) -> float:
    """Density of liquid water (Kell-type fit, good to 0.01 % for 0-40 C)."""
    t = temperature_c
    return (
        999.83952 + 16.945176 * t - 7.9870401e-3 * t**2 - 46.170461e-6 * t**3
        + 105.56302e-9 * t**4 - 280.54253e-12 * t**5
    ) / (1.0 + 16.879850e-3 * t)


def water_proton_density_per_m3(temperature_c: float = 20.0) -> float:
    """Proton number density of water: N = 2 rho N_A / M_H2O (6.674e28 /m^3 at 20 C)."""
    return 2.0 * water_density_kg_per_m3(temperature_c) * AVOGADRO_PER_MOL / WATER_MOLAR_MASS_KG_PER_MOL


def curie_magnetisation_a_per_m(
    field_t: float,
    temperature_c: float,
    proton_density_per_m3: float,
    gamma_rad_per_s_t: float = GAMMA_SHIELDED_RAD_PER_S_T,
) -> float:
    """Equilibrium magnetisation M0 = N gamma^2 hbar^2 I(I+1) B / (3 k T), I = 1/2, in A/m."""
    spin = 0.5
    temperature_k = temperature_c + KELVIN_OFFSET
    return (
        proton_density_per_m3 * gamma_rad_per_s_t**2 * HBAR_J_S**2 * spin * (spin + 1.0) * field_t
        / (3.0 * BOLTZMANN_J_PER_K * temperature_k)
    )


def polarisation_buildup(duration_s: float, t1_s: float, start_fraction: float = 0.0) -> float:
    """Fraction of M0 reached after polarising for duration_s from start_fraction.

    M(t)/M0 = 1 - (1 - m_start) exp(-t / T1).
    """
    return 1.0 - (1.0 - start_fraction) * math.exp(-duration_s / t1_s)


def reciprocity_emf_v(
    frequency_hz: float, field_per_amp_t: float, transverse_magnetisation_a_per_m: float, volume_m3: float
) -> float:
    """Peak EMF emf0 = omega0 (B1/i) M_perp V (Hoult & Richards 1976)."""
    return 2.0 * math.pi * frequency_hz * field_per_amp_t * transverse_magnetisation_a_per_m * volume_m3


def johnson_noise_density_v_per_rthz(resistance_ohm: float, temperature_c: float) -> float:
    """Thermal noise voltage density e_n = sqrt(4 k T R) in V/sqrt(Hz)."""
    return math.sqrt(4.0 * BOLTZMANN_J_PER_K * (temperature_c + KELVIN_OFFSET) * resistance_ohm)


def adiabatic_rate_t_per_s(earth_field_t: float, gamma_rad_per_s_t: float = GAMMA_SHIELDED_RAD_PER_S_T) -> float:
    """gamma Be^2, the rate of change of the polarising field that separates the regimes (T/s).

    With Bp perpendicular to Be, the field direction turns fastest as Bp passes Be; the spins
    follow it (adiabatic) when dBp/dt << gamma Be^2 and are left behind (sudden) when
    dBp/dt >> gamma Be^2 [calc from Abragam's adiabatic condition; REFERENCE.md].
    0.67 T/s at 50 uT.
    """
    return gamma_rad_per_s_t * earth_field_t**2


SUDDEN_RATIO: float = 10.0     # common practice, no source
ADIABATIC_RATIO: float = 0.1   # common practice, no source


def switch_off_regime(field_rate_t_per_s: float, earth_field_t: float) -> tuple[float, str]:
    """Ratio (dBp/dt) / (gamma Be^2) and its regime: 'sudden' (>= 10), 'adiabatic' (<= 0.1) or 'intermediate'."""
    ratio = field_rate_t_per_s / adiabatic_rate_t_per_s(earth_field_t)
    if ratio >= SUDDEN_RATIO:
        return ratio, "sudden"
    if ratio <= ADIABATIC_RATIO:
        return ratio, "adiabatic"
    return ratio, "intermediate"


def sample_size_m(volume_l: float) -> float:
    """Size of a sample for the gradient broadening: the cube root of its volume."""
    return (volume_l * 1e-3) ** (1.0 / 3.0)


def inhomogeneous_rate_per_s(gradient_nt_per_m: float, sample_length_m: float, gamma_hz_per_nt: float) -> float:
    """1/T2' = pi (gamma/2pi) G L for a gradient G across a sample of size L (REFERENCE.md, [calc])."""
    return math.pi * gamma_hz_per_nt * gradient_nt_per_m * sample_length_m


def t2star_s(t2_s: float, gradient_nt_per_m: float, sample_length_m: float, gamma_hz_per_nt: float) -> float:
    """1/T2* = 1/T2 + 1/T2'."""
    return 1.0 / (1.0 / t2_s + inhomogeneous_rate_per_s(gradient_nt_per_m, sample_length_m, gamma_hz_per_nt))
