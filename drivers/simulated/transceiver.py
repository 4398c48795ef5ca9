"""Simulated sound-card transceiver: plays gate and transmit waveforms, records coil and reference.

The received voltage is computed, sample by sample on the converter clock, from the
physics of the shared SimulatedInstrument:

1. magnetisation builds up (T1) towards the Curie value at the polarising field;
2. the switch-off ramp given by the gate samples is integrated with the Bloch equation, and
   the magnitude relaxes (T1) towards the equilibrium of the falling field;
3. pulses on the transmit channel are demodulated at the Larmor frequency in blocks of whole
   Larmor periods and applied as rotations in the rotating frame to a set of isochromats
   (Lorentzian offsets -> T2'), composed per isochromat over each pulse;
4. free precession with T2 and, with the coil off, T1 recovery towards the Earth's-field
   equilibrium; the EMF by reciprocity emf = omega0 (B1/i) V sin(a) M_perp;
5. coil Johnson and preamp noise, mains hum, spikes, gain, AC coupling, switch-off ringing,
   ADC clipping and quantisation.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.signal import butter, lfilter, lfiltic

from controller.errors import DriverError
from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T
from controller.physics.magnetisation import curie_magnetisation_a_per_m, johnson_noise_density_v_per_rthz
from drivers.protocols import Recording
from drivers.simulated import interference, spins
from drivers.simulated.instrument import SimulatedInstrument

CHANNELS = ("signal", "reference")
TRANSMIT_A_PER_V = 1e-3  # transmit amplifier transconductance of the simulated rig
PROPAGATOR_MATCH = 1e-2  # relative agreement of B1 blocks for reusing a pulse's rotations
TX_FEEDTHROUGH = 10.0  # transmit voltage reaching the ADC while the coil transmits (overloads it)


class SimulatedTransceiver:
    def __init__(self, instrument: SimulatedInstrument) -> None:
        self.inst = instrument
        self.sample_rate_hz = float(instrument.rig.transceiver.sample_rate_hz)
        self.channel_names = CHANNELS
        self._propagators: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []

    def describe(self) -> dict[str, Any]:
        return {"driver": "simulated", "role": "transceiver", "sample_rate_hz": self.sample_rate_hz,
                "channels": list(self.channel_names)}

    def silence(self) -> None:
        """Nothing plays between segments; idempotent."""

    # ------------------------------------------------------------------------------------
    def play_and_record(self, gate: np.ndarray, tx: np.ndarray) -> Recording:
        inst = self.inst
        if inst.faults.transceiver_error:
            raise DriverError("simulated transceiver: injected stream failure")
        fs = self.sample_rate_hz
        n = int(gate.size)
        start_s = inst.clock.now()
        inst.advance()
        below = np.flatnonzero(gate < 1.0)
        k_off = int(below[0]) if below.size else n
        zero = np.flatnonzero(gate[k_off:] <= 0.0)
        k_end = k_off + int(zero[0]) if zero.size else n

        current = inst.current_a if inst.output_on else 0.0
        inst.clock.sleep(k_off / fs)
        inst.advance()
        larmor_hz = inst.larmor_hz(start_s)
        omega0 = 2 * np.pi * larmor_hz
        axis = math.radians(inst.rig.coil.axis_to_field_deg)
        bp_t = inst.coil.field_per_amp_t * current
        be_t = inst.earth_field_nt(start_s) * 1e-9
        b_dir = np.array([bp_t * math.sin(axis), 0.0, be_t + bp_t * math.cos(axis)])
        m_vec = inst.magnetisation_a_per_m * b_dir / np.linalg.norm(b_dir)
        if k_off < n:
            ramp = gate[max(0, k_off - 1):k_end + 1]
            m_vec = spins.integrate_switch_off(m_vec, ramp, fs, bp_t, be_t, axis, GAMMA_SHIELDED_RAD_PER_S_T)
            m_vec = m_vec * self._ramp_relaxation_factor(ramp, bp_t, be_t, axis, float(np.linalg.norm(m_vec)))
        inst.switch_off()

        emf, m_final_z = self._signal_after_switch_off(m_vec, k_end, n, tx, omega0, axis)
        times = start_s + np.arange(n) / fs
        hum = interference.mains_hum(times, inst.mains_hz(start_s), inst.sim.mains_amplitude_uv * 1e-6,
                                     inst.sim.mains_harmonics, inst._mains_phases)
        spk = interference.spikes(n, fs, inst.sim.spike_rate_per_s, inst.sim.spike_amplitude_uv * 1e-6, inst.rng)
        thermal = johnson_noise_density_v_per_rthz(inst.coil_resistance_ohm(), inst.coil_temperature_c)
        density = math.hypot(thermal, inst.rig.receive.preamp_noise_nv_per_rthz * 1e-9)
        signal_in = emf + hum + spk + interference.white_noise_v(n, density, fs, inst.rng)
        coupling = inst.sim.reference_coupling
        reference_in = coupling * (hum + spk) + interference.white_noise_v(n, density, fs, inst.rng)

        since = (np.arange(n) - k_off) / fs
        ringing = np.zeros(n)
        if n and gate[0] > 0:  # only a current that was on rings when it is switched off
            ringing = interference.ringing_adc_v(since, inst.sim.ringing_amplitude_v, inst.sim.ringing_decay_s,
                                                 inst.sim.ringing_frequency_hz)
        signal_adc = self._adc(self._receive_chain(signal_in) + ringing + TX_FEEDTHROUGH * tx)
        reference_adc = self._adc(self._receive_chain(reference_in) + 0.1 * ringing)

        inst.clock.sleep((n - k_off) / fs)
        inst.advance()
        inst.magnetisation_a_per_m = m_final_z
        samples = np.stack([signal_adc, reference_adc]).astype(np.float32)
        return Recording(samples=samples, channel_names=self.channel_names, sample_rate_hz=fs,
                         started_at_s=start_s, latency_samples=0, overrun=False)

    # ------------------------------------------------------------------------------------
    def _ramp_relaxation_factor(self, ramp: np.ndarray, bp_t: float, be_t: float, axis: float,
                                magnitude_a_per_m: float) -> float:
        """|M| after the ramp over |M| before: M_k+1 = Meq_k + (M_k - Meq_k) exp(-dt/T1) sample by sample,
        Meq_k the Curie value of the field |Be + g_k Bp| (T1 at the polarising field while current flows).

        Exact for M along the field (adiabatic ramps); a sudden ramp is too short for it to matter.
        """
        inst = self.inst
        if ramp.size < 2 or magnitude_a_per_m <= 0:
            return 1.0
        field_t = np.hypot(be_t + bp_t * ramp * math.cos(axis), bp_t * ramp * math.sin(axis))
        m_eq = curie_magnetisation_a_per_m(1.0, inst.sample.temperature_c, inst.proton_density_per_m3) * field_t
        decay = math.exp(-1.0 / (self.sample_rate_hz * inst.sample.t1_s))
        b, a = [1.0 - decay], [1.0, -decay]
        m = lfilter(b, a, m_eq[:-1], zi=lfiltic(b, a, [magnitude_a_per_m]))[0]
        return float(m[-1]) / magnitude_a_per_m

    def _signal_after_switch_off(self, m_vec: np.ndarray, k_start: int, n: int, tx: np.ndarray, omega0: float,
                                 axis: float) -> tuple[np.ndarray, float]:
        """EMF (V) at the coil for samples k_start..n, and the mean Mz left at the end."""
        inst = self.inst
        fs = self.sample_rate_hz
        emf = np.zeros(n)
        if k_start >= n:
            return emf, float(m_vec[2])
        t_start = k_start / fs
        offsets, weights = spins.lorentzian_isochromats(inst.inhomogeneous_rate_per_s, (n - k_start) / fs)
        m_rot = complex(m_vec[0], m_vec[1]) * np.exp(1j * omega0 * t_start)
        iso = np.tile([m_rot.real, m_rot.imag, m_vec[2]], (offsets.size, 1))
        m0_earth = curie_magnetisation_a_per_m(inst.earth_field_nt() * 1e-9, inst.sample.temperature_c,
                                               inst.proton_density_per_m3)
        t1, t2 = inst.t1_earth_s, inst.sample.t2_s
        envelope = np.zeros(n, dtype=complex)
        b1_per_v = TRANSMIT_A_PER_V * inst.coil.field_per_amp_t * math.sin(axis)
        k = k_start
        self._propagators: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
        for p0, p1 in [*transmit_runs(tx, k_start), (n, n)]:
            if p0 > k:
                envelope[k:p0] = self._free_envelope(iso, offsets, weights, p0 - k, t2)
                iso = spins.free_evolution(iso, offsets, (p0 - k) / fs, t1, t2, m0_earth)
            if p1 > p0:
                iso = self._apply_pulse(iso, tx[p0:p1] * b1_per_v, p0, omega0, offsets, t1, t2, m0_earth)
            k = max(k, p1)
        t_abs = np.arange(n) / fs
        scale = omega0 * inst.coil.field_per_amp_t * inst.sample_volume_m3 * math.sin(axis)
        emf = scale * np.real(1j * envelope * np.exp(-1j * omega0 * t_abs))
        return emf, float(np.sum(iso[:, 2] * weights) / np.sum(weights))

    def _apply_pulse(self, iso: np.ndarray, b1_lab_t: np.ndarray, first_sample: int, omega0: float,
                     offsets: np.ndarray, t1_s: float, t2_s: float, m0_earth: float) -> np.ndarray:
        """Turn the isochromats through one pulse (linear lab field b1_lab_t from first_sample on).

        The rotating-frame field is the co-rotating half of the linear field, block by block
        (rotating_wave_blocks); relaxation is split half before, half after.
        """
        fs = self.sample_rate_hz
        count = b1_lab_t.size
        b1_blocks, sizes = rotating_wave_blocks(b1_lab_t, first_sample, fs, omega0)
        half = count / fs / 2
        zero = np.zeros_like(offsets)
        iso = spins.free_evolution(iso, zero, half, t1_s, t2_s, m0_earth)
        rotations, turn = self._cached_propagators(b1_blocks, sizes)
        if rotations is None:
            rotations = spins.pulse_propagators(b1_blocks, sizes / fs, offsets, GAMMA_SHIELDED_RAD_PER_S_T)
            self._propagators.append((b1_blocks, sizes, rotations))
            turn = 0.0
        iso = spins.rotate_about_z(iso, -turn)
        iso = np.einsum("kij,kj->ki", rotations, iso)
        iso = spins.rotate_about_z(iso, turn)
        return spins.free_evolution(iso, zero, half, t1_s, t2_s, m0_earth)

    def _cached_propagators(self, b1_blocks: np.ndarray, sizes: np.ndarray) -> tuple[np.ndarray | None, float]:
        """A pulse already computed whose blocks equal these turned by one phase: (its rotations, that phase).

        In the rotating frame a field turned by a about z gives the rotation Rz(a) R Rz(-a)
        (offsets lie along z), so a train of equal pulses needs one propagator.  The co-rotating
        field of a pulse at the transmit frequency is exactly its predecessor's turned by
        (w_tx - w0) times the time between them; the block fit reproduces that only to about
        1e-3 off resonance, hence the tolerance PROPAGATOR_MATCH.
        """
        for blocks, known_sizes, rotations in self._propagators:
            if known_sizes.shape != sizes.shape or not np.array_equal(known_sizes, sizes):
                continue
            ratio = b1_blocks / np.where(blocks != 0, blocks, 1.0)
            if np.all(np.abs(ratio - ratio[0]) <= PROPAGATOR_MATCH) and abs(abs(ratio[0]) - 1.0) <= PROPAGATOR_MATCH:
                return rotations, float(np.angle(ratio[0]))
        return None, 0.0

    def _free_envelope(self, iso: np.ndarray, offsets: np.ndarray, weights: np.ndarray, count: int,
                       t2_s: float) -> np.ndarray:
        """Transverse envelope over count samples, computed on a decimated grid and spline-interpolated."""
        fs = self.sample_rate_hz
        max_offset_hz = float(np.max(np.abs(offsets))) / (2 * np.pi) if offsets.size else 0.0
        step = int(max(1, min(64, fs / (16.0 * max(max_offset_hz, 1.0)))))
        coarse = np.arange(0, count + step, step)
        env = spins.transverse_envelope(iso, offsets, weights, coarse / fs, t2_s)
        if step == 1:
            return env[:count]
        return CubicSpline(coarse, env)(np.arange(count))

    def _receive_chain(self, volts_in: np.ndarray) -> np.ndarray:
        """Gain, then AC coupling: a first-order high-pass at highpass_hz."""
        rx = self.inst.rig.receive
        out = rx.gain * volts_in
        if rx.highpass_hz > 0:
            b, a = butter(1, rx.highpass_hz / (self.sample_rate_hz / 2), btype="high")
            out = lfilter(b, a, out)
        return out

    def _adc(self, volts: np.ndarray) -> np.ndarray:
        """Clip at +/- full scale and quantise to adc_bits."""
        rx = self.inst.rig.receive
        lsb = 2.0 * rx.adc_full_scale_v / 2**rx.adc_bits
        return np.clip(np.round(volts / lsb) * lsb, -rx.adc_full_scale_v, rx.adc_full_scale_v - lsb)


def transmit_runs(tx: np.ndarray, from_sample: int) -> list[tuple[int, int]]:
    """(start, stop) sample ranges where the transmit waveform is non-zero, from from_sample on."""
    on = np.zeros(tx.size + 2, dtype=np.int8)
    on[1:-1] = tx != 0
    on[1:from_sample + 1] = 0
    edges = np.diff(on)
    return list(zip(np.flatnonzero(edges == 1).tolist(), np.flatnonzero(edges == -1).tolist()))


def rotating_wave_blocks(field: np.ndarray, first_sample: int, sample_rate_hz: float,
                         omega0_rad_per_s: float) -> tuple[np.ndarray, np.ndarray]:
    """Co-rotating part b = (a + i b)/2 of a linear field, block by block, and the block sizes.

    In each block (about one Larmor period; a short remainder joins the block before it) the
    field is fitted by least squares with a cos(w0 t) + b sin(w0 t), t counted from the
    segment's first sample.  The slowly varying part of B(t) exp(+i w0 t) is then (a + i b)/2:
    for B = A cos(w0 t + phi) exactly (A/2) exp(-i phi), whatever the block length, so no
    residue of the counter-rotating half (the Bloch-Siegert term, neglected here) is left.
    """
    count = field.size
    block = max(2, int(round(sample_rate_hz * 2 * np.pi / omega0_rad_per_s)))
    edges = np.arange(0, count, block)
    if edges.size > 1 and count - edges[-1] < block // 2:
        edges = edges[:-1]
    sizes = np.diff(np.append(edges, count))
    phase = omega0_rad_per_s * (first_sample + np.arange(count)) / sample_rate_hz
    c, s = np.cos(phase), np.sin(phase)

    def sums(values: np.ndarray) -> np.ndarray:
        return np.add.reduceat(values, edges)

    scc, sss, scs = sums(c * c), sums(s * s), sums(c * s)
    yc, ys = sums(field * c), sums(field * s)
    det = scc * sss - scs**2
    ok = det > 1e-12 * np.maximum(scc * sss, 1e-300)
    safe = np.where(ok, det, 1.0)
    a = np.where(ok, (sss * yc - scs * ys) / safe, 2 * yc / np.maximum(sizes, 1))
    b = np.where(ok, (scc * ys - scs * yc) / safe, 2 * ys / np.maximum(sizes, 1))
    return (a + 1j * b) / 2, sizes
