"""Simulated sound-card transceiver: plays gate and transmit waveforms, records coil and reference.

The received voltage is computed, sample by sample on the converter clock, from the
physics of the shared SimulatedInstrument:

1. magnetisation builds up (T1) towards the Curie value at the polarising field;
2. the switch-off ramp given by the gate samples is integrated with the Bloch equation;
3. pulses on the transmit channel are demodulated at the Larmor frequency and applied as
   rotations in the rotating frame to a set of isochromats (Lorentzian offsets -> T2');
4. free precession with T2, and the EMF by reciprocity emf = omega0 (B1/i) V sin(a) M_perp;
5. coil Johnson and preamp noise, mains hum, spikes, gain, AC coupling, switch-off ringing,
   ADC clipping and quantisation.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.signal import butter, lfilter

from controller.errors import DriverError
from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T
from controller.physics.magnetisation import curie_magnetisation_a_per_m, johnson_noise_density_v_per_rthz
from drivers.protocols import Recording
from drivers.simulated import interference, spins
from drivers.simulated.instrument import SimulatedInstrument

CHANNELS = ("signal", "reference")
TRANSMIT_A_PER_V = 1e-3  # transmit amplifier transconductance of the simulated rig
TX_FEEDTHROUGH = 10.0  # transmit voltage reaching the ADC while the coil transmits (overloads it)


class SimulatedTransceiver:
    def __init__(self, instrument: SimulatedInstrument) -> None:
        self.inst = instrument
        self.sample_rate_hz = float(instrument.rig.transceiver.sample_rate_hz)
        self.channel_names = CHANNELS

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
            m_vec = spins.integrate_switch_off(m_vec, gate[max(0, k_off - 1):k_end + 1], fs, bp_t, be_t, axis,
                                               GAMMA_SHIELDED_RAD_PER_S_T)
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
        t1, t2 = inst.sample.t1_s, inst.sample.t2_s
        envelope = np.zeros(n, dtype=complex)
        tx_on = np.abs(tx) > 0
        b1_per_v = TRANSMIT_A_PER_V * inst.coil.field_per_amp_t * math.sin(axis)
        block = max(1, int(round(fs * 2 * np.pi / omega0)))
        k = k_start
        while k < n:
            if tx_on[k]:
                stop = k
                while stop < n and tx_on[stop]:
                    stop += 1
                for b0 in range(k, stop, block):
                    b1 = min(stop, b0 + block)
                    t = np.arange(b0, b1) / fs
                    b1_rot = np.mean(tx[b0:b1] * b1_per_v * np.exp(1j * omega0 * t))
                    iso = spins.pulse_rotation(iso, complex(b1_rot), offsets, GAMMA_SHIELDED_RAD_PER_S_T, (b1 - b0) / fs)
                    iso = spins.free_evolution(iso, np.zeros_like(offsets), (b1 - b0) / fs, t1, t2, m0_earth)
                k = stop
                continue
            stop = k
            nxt = np.flatnonzero(tx_on[k:])
            stop = k + int(nxt[0]) if nxt.size else n
            envelope[k:stop] = self._free_envelope(iso, offsets, weights, stop - k, t2)
            iso = spins.free_evolution(iso, offsets, (stop - k) / fs, t1, t2, m0_earth)
            k = stop
        t_abs = np.arange(n) / fs
        scale = omega0 * inst.coil.field_per_amp_t * inst.sample_volume_m3 * math.sin(axis)
        emf = scale * np.real(1j * envelope * np.exp(-1j * omega0 * t_abs))
        return emf, float(np.sum(iso[:, 2] * weights) / np.sum(weights))

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
        fine = np.arange(count)
        return CubicSpline(coarse, env.real)(fine) + 1j * CubicSpline(coarse, env.imag)(fine)

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
