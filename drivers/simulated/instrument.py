"""The simulated instrument's shared state and physics.

One object holds what the supply, the transceiver and the board of a simulated rig act on:
the coil current and temperature, the nuclear magnetisation and the site's field, all
advanced on the same (usually virtual) clock.  Nothing here is canned: the signal is
computed from the Curie law, the Bloch equations and reciprocity (controller.physics).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from controller.clock import Clock
from controller.config.schema import RigConfig, SampleConfig, SiteConfig
from controller.physics.constants import GAMMA_SHIELDED_HZ_PER_T, GAMMA_SHIELDED_RAD_PER_S_T
from controller.physics.magnetisation import (
    curie_magnetisation_a_per_m, inhomogeneous_rate_per_s, sample_size_m, t2star_s, water_proton_density_per_m3,
)
from controller.rigmodel import coil_model, coil_thermal_model

SECONDS_PER_DAY = 86400.0


@dataclass
class Faults:
    """Faults that tests can inject (more arrive with the interlock work)."""

    supply_dead: bool = False
    transceiver_error: bool = False


class SimulatedInstrument:
    """State shared by the simulated drivers; see module docstring."""

    def __init__(self, rig: RigConfig, site: SiteConfig, sample: SampleConfig, clock: Clock) -> None:
        if rig.simulator is None:
            raise ValueError("rig has no [simulator] table")
        self.rig = rig
        self.site = site
        self.sample = sample
        self.clock = clock
        self.sim = rig.simulator
        self.coil = coil_model(rig.coil)
        self.thermal = coil_thermal_model(rig.coil)
        self.rng = np.random.default_rng(self.sim.seed)
        self.faults = Faults()
        self.current_a = 0.0
        self.output_on = False
        self.coil_temperature_c = rig.coil.ambient_c
        self.proton_density_per_m3 = water_proton_density_per_m3(sample.temperature_c)
        self.magnetisation_a_per_m = 0.0  # along the instantaneous total field
        self.path = "idle"
        self._last_s = clock.now()
        self._mains_phases = self.rng.uniform(0, 2 * np.pi, size=max(1, self.sim.mains_harmonics))
        self._mains_wander_phase = self.rng.uniform(0, 2 * np.pi)

    # ---- truth, for tests and for the simulated transceiver ------------------------------
    @property
    def sample_volume_m3(self) -> float:
        return self.sample.volume_l * 1e-3

    def earth_field_nt(self, at_s: float | None = None) -> float:
        """Site field with a diurnal swing: B = B0 + A sin(2 pi (t_of_day - 6 h) / 1 day)."""
        t = self.clock.now() if at_s is None else at_s
        day_phase = 2 * np.pi * ((t % SECONDS_PER_DAY) / SECONDS_PER_DAY - 0.25)
        return self.site.field_nt + self.site.diurnal_amplitude_nt * math.sin(day_phase)

    def larmor_hz(self, at_s: float | None = None) -> float:
        """True Larmor frequency f = gamma'_p/2pi * B (shielded protons, CODATA 2022)."""
        return GAMMA_SHIELDED_HZ_PER_T * self.earth_field_nt(at_s) * 1e-9

    @property
    def inhomogeneous_rate_per_s(self) -> float:
        """1/T2' = pi * gamma/2pi * G * L, L the sample's cube-root size (REFERENCE.md)."""
        return inhomogeneous_rate_per_s(self.site.gradient_nt_per_m, sample_size_m(self.sample.volume_l),
                                        GAMMA_SHIELDED_HZ_PER_T * 1e-9)

    @property
    def t2star_s(self) -> float:
        """1/T2* = 1/T2 + 1/T2'."""
        return t2star_s(self.sample.t2_s, self.site.gradient_nt_per_m, sample_size_m(self.sample.volume_l),
                        GAMMA_SHIELDED_HZ_PER_T * 1e-9)

    def equilibrium_magnetisation_a_per_m(self, current_a: float) -> float:
        """Curie-law M0 at |B| = |Be + Bp| for the coil current."""
        bp = self.coil.field_per_amp_t * current_a
        be = self.earth_field_nt() * 1e-9
        a = math.radians(self.rig.coil.axis_to_field_deg)
        b = math.hypot(be + bp * math.cos(a), bp * math.sin(a))
        return curie_magnetisation_a_per_m(b, self.sample.temperature_c, self.proton_density_per_m3)

    # ---- time evolution ---------------------------------------------------------------
    def advance(self) -> None:
        """Bring coil temperature and magnetisation up to the clock's now at the present current."""
        now = self.clock.now()
        dt = now - self._last_s
        if dt <= 0:
            return
        current = self.current_a if self.output_on else 0.0
        self.coil_temperature_c = self.thermal.step(self.coil_temperature_c, current, dt)
        m_eq = self.equilibrium_magnetisation_a_per_m(current)
        e1 = math.exp(-dt / self.sample.t1_s)
        self.magnetisation_a_per_m = m_eq + (self.magnetisation_a_per_m - m_eq) * e1
        self._last_s = now

    def set_current(self, current_a: float) -> None:
        self.advance()
        self.current_a = current_a
        self.output_on = current_a > 0

    def switch_off(self) -> None:
        self.advance()
        self.current_a = 0.0
        self.output_on = False

    def coil_resistance_ohm(self) -> float:
        return self.coil.resistance_ohm(self.coil_temperature_c)

    def mains_hz(self, at_s: float) -> float:
        """Mains fundamental wandering slowly (period ~17 min) by up to mains_drift_hz."""
        return self.site.mains_hz + self.sim.mains_drift_hz * math.sin(2 * np.pi * at_s / 1000.0 + self._mains_wander_phase)
