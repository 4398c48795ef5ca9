"""Physical constants, taken from CODATA 2022 through scipy.constants.

The proton gyromagnetic ratio is a setting: the shielded value (protons in a
spherical water sample at 25 C) is the default for field from frequency; the
free-proton value and the IAGA convention (CODATA 2006 gamma'_p) are offered
for comparison.  Every result stores the value it used.
"""

from __future__ import annotations

from scipy import constants as _sc

#: Boltzmann constant k_B in J/K.
BOLTZMANN_J_PER_K: float = _sc.k
#: Reduced Planck constant hbar in J s.
HBAR_J_S: float = _sc.hbar
#: Vacuum permeability mu_0 in T m / A.
MU0_T_M_PER_A: float = _sc.mu_0
#: Avogadro constant in 1/mol.
AVOGADRO_PER_MOL: float = _sc.N_A

#: Free-proton gyromagnetic ratio gamma_p / 2 pi in Hz/T (CODATA 2022).
GAMMA_FREE_HZ_PER_T: float = _sc.physical_constants["proton gyromag. ratio in MHz/T"][0] * 1e6
#: Shielded-proton (H2O, sphere, 25 C) gamma'_p / 2 pi in Hz/T (CODATA 2022).
GAMMA_SHIELDED_HZ_PER_T: float = (
    _sc.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e6
)
#: gamma'_p of CODATA 2006 (2.675153362e8 /T/s) as adopted by IAGA for geomagnetism, in Hz/T.
GAMMA_IAGA_2006_HZ_PER_T: float = 2.675153362e8 / (2.0 * _sc.pi)

#: Proton gyromagnetic ratio in rad/(s T), shielded.
GAMMA_SHIELDED_RAD_PER_S_T: float = 2.0 * _sc.pi * GAMMA_SHIELDED_HZ_PER_T

GAMMA_CHOICES_HZ_PER_T: dict[str, float] = {
    "shielded": GAMMA_SHIELDED_HZ_PER_T,
    "free": GAMMA_FREE_HZ_PER_T,
    "iaga2006": GAMMA_IAGA_2006_HZ_PER_T,
}


def gamma_hz_per_nt(choice: str | float = "shielded") -> float:
    """Return gamma/2pi in Hz/nT for a named choice ('shielded', 'free', 'iaga2006') or a value in Hz/nT."""
    if isinstance(choice, (int, float)):
        return float(choice)
    return GAMMA_CHOICES_HZ_PER_T[choice] * 1e-9


def larmor_frequency_hz(field_nt: float, gamma_hz_per_nt_value: float | None = None) -> float:
    """Larmor frequency f = (gamma / 2 pi) B, with B in nT."""
    g = gamma_hz_per_nt("shielded") if gamma_hz_per_nt_value is None else gamma_hz_per_nt_value
    return g * field_nt


def field_from_frequency_nt(frequency_hz: float, gamma_hz_per_nt_value: float | None = None) -> float:
    """Field B = f / (gamma / 2 pi) in nT."""
    g = gamma_hz_per_nt("shielded") if gamma_hz_per_nt_value is None else gamma_hz_per_nt_value
    return frequency_hz / g
