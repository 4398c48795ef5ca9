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
    """Faults that tests can inject.

    The `*_at_s` faults are off while None and active from that clock time on (seconds since
    the epoch, on the instrument's clock), so a test can place a fault mid-pulse.  A fault with
    a `*_until_s` partner ends at that time (a device that drops out and comes back).
    """

    supply_dead: bool = False
    transceiver_error: bool = False
    open_coil_at_s: float | None = None  # the coil circuit breaks: no current, supply at its voltage limit
    shorted_coil_at_s: float | None = None  # the leads short: current flows, not through the coil
    stuck_supply_at_s: float | None = None  # the supply ignores new setpoints and output_off
    rising_resistance_at_s: float | None = None  # a failing joint: series resistance grows
    rising_resistance_ohm_per_s: float = 0.5
    board_silent_at_s: float | None = None  # the board stops answering (heartbeat lost)
    board_silent_until_s: float | None = None  # ... and answers again from then on (unplugged, replugged)
    supply_lost_at_s: float | None = None  # the supply vanishes: every command raises DriverError
    supply_lost_until_s: float | None = None  # ... until it comes back
    battery_sag_at_s: float | None = None  # the battery voltage falls
    battery_sag_v_per_s: float = 0.5
    overshoot_at_s: float | None = None  # the supply delivers more than its setpoint
    overshoot_fraction: float = 0.6
    thermistor_offset_at_s: float | None = None  # the thermistor comes loose and reads low
    thermistor_offset_k: float = -30.0
    store_write_failure_at_s: float | None = None  # the database refuses to grow (simulated host)
    disk_full_at_s: float | None = None  # free space beside the store reads near zero (simulated host)

    def active(self, name: str, now_s: float) -> bool:
        onset = getattr(self, f"{name}_at_s")
        until = getattr(self, f"{name}_until_s", None)
        return onset is not None and now_s >= onset and (until is None or now_s < until)

    def since_s(self, name: str, now_s: float) -> float:
        """Seconds the fault has been active (0 when it is not)."""
        return now_s - getattr(self, f"{name}_at_s") if self.active(name, now_s) else 0.0


SHORT_RESISTANCE_OHM = 0.02


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
        self.supply_live = False  # the supply's output is on (whether or not the coil carries current)
        self.switched_off_at_s: float | None = None  # when the coil circuit last opened
        self.compliance_v = rig.supervisor.supply_compliance_v
        self.thermal_state = self.thermal.initial_state(rig.coil.ambient_c)
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
    def t1_earth_s(self) -> float:
        """T1 with the coil off (in the Earth's field); the sample's t1_earth_s, else its t1_s."""
        return self.sample.t1_earth_s if self.sample.t1_earth_s is not None else self.sample.t1_s

    def t1_at_current_s(self, current_a: float) -> float:
        """T1 at the field of the coil current: t1_s while polarising, t1_earth_s with the coil off."""
        return self.sample.t1_s if current_a > 0 else self.t1_earth_s

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
        current = self.coil_current_a(self._last_s)
        self.thermal_state = self.thermal.advance(self.thermal_state, current, dt)
        m_eq = self.equilibrium_magnetisation_a_per_m(current)
        e1 = math.exp(-dt / self.t1_at_current_s(current))
        self.magnetisation_a_per_m = m_eq + (self.magnetisation_a_per_m - m_eq) * e1
        self._last_s = now

    def field_direction(self, current_a: float) -> np.ndarray:
        """Unit vector of Be z + Bp(current) n, n the coil axis in the x-z plane."""
        a = math.radians(self.rig.coil.axis_to_field_deg)
        bp = self.coil.field_per_amp_t * current_a
        vector = np.array([bp * math.sin(a), 0.0, self.earth_field_nt() * 1e-9 + bp * math.cos(a)])
        return vector / np.linalg.norm(vector)

    def set_current(self, current_a: float) -> None:
        """Step the current.  The magnetisation keeps only its part along the new field: a sudden
        turn of the field leaves the rest precessing about it, dephasing within T2 (not tracked)."""
        self.advance()
        before = self.coil_current_a()
        self.current_a = current_a
        self.output_on = current_a > 0
        self.supply_live = current_a > 0
        after = self.coil_current_a()
        if before != after:
            self.magnetisation_a_per_m *= float(self.field_direction(before) @ self.field_direction(after))

    def switch_off(self) -> None:
        """The coil circuit opens (gate, relay or supply off): no current through the coil."""
        self.advance()
        if self.output_on:
            self.switched_off_at_s = self.clock.now()
        self.output_on = False
        if not self.supply_live:
            self.current_a = 0.0

    @property
    def coil_temperature_c(self) -> float:
        """The winding's temperature (first node of the thermal state)."""
        return self.thermal.winding_c(self.thermal_state)

    @coil_temperature_c.setter
    def coil_temperature_c(self, temperature_c: float) -> None:
        """Set every thermal node to temperature_c (a coil that starts warm)."""
        self.thermal_state = self.thermal.initial_state(temperature_c)

    def coil_resistance_ohm(self) -> float:
        return self.coil.resistance_ohm(self.coil_temperature_c)

    def circuit_resistance_ohm(self, at_s: float | None = None) -> float:
        """Coil R(T) plus any resistance a failing joint has added."""
        t = self.clock.now() if at_s is None else at_s
        f = self.faults
        return self.coil_resistance_ohm() + f.rising_resistance_ohm_per_s * f.since_s("rising_resistance", t)

    def coil_current_a(self, at_s: float | None = None) -> float:
        """Current through the winding: zero when off, open or bypassed; capped by the voltage limit."""
        t = self.clock.now() if at_s is None else at_s
        f = self.faults
        if not self.output_on or f.active("open_coil", t) or f.active("shorted_coil", t):
            return 0.0
        current = self.current_a * (1.0 + (f.overshoot_fraction if f.active("overshoot", t) else 0.0))
        return min(current, self.compliance_v / self.circuit_resistance_ohm(t))

    def mains_hz(self, at_s: float) -> float:
        """Mains fundamental wandering slowly (period ~17 min) by up to mains_drift_hz."""
        return self.site.mains_hz + self.sim.mains_drift_hz * math.sin(2 * np.pi * at_s / 1000.0 + self._mains_wander_phase)
