"""Signal budget of one shot: from the rig, sample, site and sequence to SNR and field precision.

Chain (REFERENCE.md "Magnetisation and signal", "Estimation limits"):

1. polarising field Bp = (B/i) I at the coil centre; |B| = |Be + Bp| at the coil's angle;
2. Curie law M0(|B|) and build-up M = M0 (1 - (1 - m_start) exp(-tp/T1)), m_start the
   Earth-field magnetisation left from the previous shot;
3. switch-off: the sequence's own rendered ramp carried through the Bloch equation (the
   simulator's integrator), giving the magnetisation left across the field; T1 loss over the
   ramp exp(-ramp/T1); a pulse, when the sequence has one, is taken as a 90 degree pulse;
4. EMF by reciprocity emf0 = omega0 (B1/i) M_perp V sin(a) [Hoult & Richards 1976];
5. decay over the dead time exp(-td/T2*), 1/T2* = 1/T2 + pi (gamma/2pi) G L;
6. noise density e_n = sqrt(4 k T R(T) + e_preamp^2) with the coil at its predicted peak
   temperature over the sequence (controller.checks);
7. Cramer-Rao frequency floor of the recorded window (controller.physics.precision), field
   sd = f sd / (gamma/2pi), shots = (sd / target)^2;
8. ADC: signal and broadband noise after gain and the first-order high-pass |H| = f/sqrt(f^2 + fc^2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from controller.checks import check_all, predicted_peak_temperature_c
from controller.config.schema import RigConfig, SampleConfig, SiteConfig
from controller.physics import magnetisation as mag
from controller.physics.coil import CoilModel
from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T, gamma_hz_per_nt
from controller.physics.precision import frequency_crb_sd_hz, optimal_polarise_s, shots_for_precision, snr_rate
from controller.rigmodel import coil_model
from controller.sequences.compile import compile_sequence
from controller.sequences.render import render_segment
from controller.sequences.timeline import Acquire, Polarise, Pulse, ShotPlan, SwitchOff, Timeline
from drivers.simulated.spins import integrate_switch_off

NOISE_PEAK_FACTOR = 4.0  # peak of Gaussian noise counted against the ADC range [practice, no source]


@dataclass(frozen=True)
class SignalBudget:
    """Every intermediate number of the budget, in the units its name says."""

    field_nt: float
    larmor_hz: float
    current_a: float
    polarise_s: float
    polarising_field_t: float
    magnetisation_equilibrium_a_per_m: float
    buildup_fraction: float
    ramp_s: float
    field_rate_t_per_s: float
    adiabatic_ratio: float
    regime: str
    transverse_fraction: float
    has_pulse: bool
    transverse_magnetisation_a_per_m: float
    emf0_v: float
    t2star_s: float
    dead_time_s: float
    amplitude_v: float
    coil_temperature_c: float
    coil_resistance_ohm: float
    johnson_v_per_rthz: float
    preamp_v_per_rthz: float
    noise_v_per_rthz: float
    snr_bandwidth_hz: float
    snr: float
    sample_rate_hz: float
    acquire_s: float
    frequency_sd_hz: float
    field_sd_nt: float
    shot_s: float


def _events(shot: ShotPlan) -> tuple[Polarise, SwitchOff, tuple[Pulse, ...], Acquire]:
    return (shot.of_kind(Polarise)[0], shot.of_kind(SwitchOff)[0], shot.of_kind(Pulse), shot.of_kind(Acquire)[0])


def _ramp_rate_t_per_s(gate: np.ndarray, fs: float, bp_t: float, be_t: float) -> float:
    """|dBp/dt| where Bp passes Be (the moment that decides the regime), or the steepest slope."""
    bp = bp_t * gate
    slope = np.abs(np.gradient(bp, 1.0 / fs)) if bp.size > 1 else np.array([math.inf])
    crossing = np.flatnonzero(bp <= be_t)
    return float(slope[crossing[0]] if crossing.size and bp_t > be_t else slope.max())


def signal_budget(coil: CoilModel, rig: RigConfig, site: SiteConfig, sample: SampleConfig, timeline: Timeline,
                  snr_bandwidth_hz: float) -> SignalBudget:
    """The budget of the timeline's first shot (pure)."""
    fs = timeline.sample_rate_hz
    shot = timeline.shots[0]
    pol, off, pulses, acq = _events(shot)
    g_hz_per_nt = gamma_hz_per_nt("shielded")
    axis = math.radians(rig.coil.axis_to_field_deg)
    be_t = site.field_nt * 1e-9
    bp_t = coil.field_per_amp_t * pol.current_a
    b_total = math.hypot(be_t + bp_t * math.cos(axis), bp_t * math.sin(axis))
    density = mag.water_proton_density_per_m3(sample.temperature_c)
    m_eq = mag.curie_magnetisation_a_per_m(b_total, sample.temperature_c, density)
    m_start = mag.curie_magnetisation_a_per_m(be_t, sample.temperature_c, density) / m_eq
    buildup = mag.polarisation_buildup(pol.duration_s, sample.t1_s, m_start)

    gate = render_segment(shot, fs).gate
    ramp_n = max(1, int(round(off.ramp_s * fs)))
    ramp_gate = gate[max(0, off.start_sample - 1):off.start_sample + ramp_n + 1]
    direction = np.array([bp_t * math.sin(axis), 0.0, be_t + bp_t * math.cos(axis)]) / b_total
    after = integrate_switch_off(direction, ramp_gate, fs, bp_t, be_t, axis, GAMMA_SHIELDED_RAD_PER_S_T)
    transverse = math.hypot(after[0], after[1])
    rate = _ramp_rate_t_per_s(ramp_gate, fs, bp_t, be_t)
    ratio, regime = mag.switch_off_regime(rate, be_t)
    m_left = m_eq * buildup * math.exp(-off.ramp_s / sample.t1_s)
    m_perp = m_left if pulses else m_left * transverse
    time_zero_sample = (pulses[-1].start_sample + pulses[-1].n_samples) if pulses else off.start_sample + ramp_n

    larmor_hz = site.field_nt * g_hz_per_nt
    volume_m3 = sample.volume_l * 1e-3
    emf0 = mag.reciprocity_emf_v(larmor_hz, coil.field_per_amp_t, m_perp, volume_m3) * math.sin(axis)
    t2star = mag.t2star_s(sample.t2_s, site.gradient_nt_per_m, mag.sample_size_m(sample.volume_l), g_hz_per_nt)
    dead_s = (acq.start_sample - time_zero_sample) / fs
    amplitude = emf0 * math.exp(-dead_s / t2star)

    coil_c = predicted_peak_temperature_c(timeline, rig)
    r_coil = coil.resistance_ohm(coil_c)
    johnson = mag.johnson_noise_density_v_per_rthz(r_coil, coil_c)
    preamp = rig.receive.preamp_noise_nv_per_rthz * 1e-9
    noise = math.hypot(johnson, preamp)
    sd_hz = frequency_crb_sd_hz(amplitude, noise, fs, acq.duration_s, t2star)
    return SignalBudget(
        field_nt=site.field_nt, larmor_hz=larmor_hz, current_a=pol.current_a, polarise_s=pol.duration_s,
        polarising_field_t=bp_t, magnetisation_equilibrium_a_per_m=m_eq, buildup_fraction=buildup,
        ramp_s=off.ramp_s, field_rate_t_per_s=rate, adiabatic_ratio=ratio, regime=regime,
        transverse_fraction=transverse, has_pulse=bool(pulses), transverse_magnetisation_a_per_m=m_perp,
        emf0_v=emf0, t2star_s=t2star, dead_time_s=dead_s, amplitude_v=amplitude, coil_temperature_c=coil_c,
        coil_resistance_ohm=r_coil, johnson_v_per_rthz=johnson, preamp_v_per_rthz=preamp, noise_v_per_rthz=noise,
        snr_bandwidth_hz=snr_bandwidth_hz, snr=amplitude / (noise * math.sqrt(snr_bandwidth_hz)),
        sample_rate_hz=fs, acquire_s=acq.duration_s, frequency_sd_hz=sd_hz, field_sd_nt=sd_hz / g_hz_per_nt,
        shot_s=shot.duration_s)


@dataclass(frozen=True)
class AdcBudget:
    highpass_gain: float
    signal_peak_v: float
    noise_rms_v: float
    headroom_db: float
    lsb_v: float
    noise_over_quantisation_db: float


def adc_budget(budget: SignalBudget, rig: RigConfig) -> AdcBudget:
    """Signal and broadband noise at the converter against its range and step."""
    rx = rig.receive
    hp = budget.larmor_hz / math.hypot(budget.larmor_hz, rx.highpass_hz)
    peak = rx.gain * hp * budget.amplitude_v
    noise_rms = rx.gain * budget.noise_v_per_rthz * math.sqrt(budget.sample_rate_hz / 2.0)
    lsb = 2.0 * rx.adc_full_scale_v / 2**rx.adc_bits
    return AdcBudget(highpass_gain=hp, signal_peak_v=peak, noise_rms_v=noise_rms,
                     headroom_db=20 * math.log10(rx.adc_full_scale_v / (peak + NOISE_PEAK_FACTOR * noise_rms)),
                     lsb_v=lsb, noise_over_quantisation_db=20 * math.log10(noise_rms / (lsb / math.sqrt(12.0))))


@dataclass(frozen=True)
class PolariseChoice:
    current_s: float
    other_s: float
    optimum_s: float
    gain_fraction: float
    violations_at_optimum: tuple[str, ...]


def polarise_choice(budget: SignalBudget, t1_s: float, spec: Any, rig: RigConfig, larmor_hz: float) -> PolariseChoice:
    """Best polarising time for SNR per unit time, and whether the rig's limits allow it."""
    other = budget.shot_s - budget.polarise_s
    best = optimal_polarise_s(t1_s, other)
    gain = snr_rate(best, t1_s, other) / snr_rate(budget.polarise_s, t1_s, other) - 1.0
    violations: tuple[str, ...] = ()
    if hasattr(spec, "polarise"):
        trial = replace(spec, polarise=replace(spec.polarise, duration_s=round(best, 3)))
        timeline = compile_sequence(trial, budget.sample_rate_hz, larmor_hz)
        violations = tuple(str(v) for v in check_all(timeline, rig))
    return PolariseChoice(current_s=budget.polarise_s, other_s=other, optimum_s=best, gain_fraction=gain,
                          violations_at_optimum=violations)


def plan_budgets(rig: RigConfig, site: SiteConfig, sample: SampleConfig, spec: Any,
                 snr_bandwidth_hz: float) -> tuple[Timeline, SignalBudget, AdcBudget, PolariseChoice]:
    """Compile the sequence for the rig and compute every budget of its first shot."""
    larmor_hz = site.field_nt * gamma_hz_per_nt("shielded")
    timeline = compile_sequence(spec, rig.transceiver.sample_rate_hz, larmor_hz)
    budget = signal_budget(coil_model(rig.coil), rig, site, sample, timeline, snr_bandwidth_hz)
    return timeline, budget, adc_budget(budget, rig), polarise_choice(budget, sample.t1_s, spec, rig, larmor_hz)
