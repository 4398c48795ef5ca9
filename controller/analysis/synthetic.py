"""Synthetic records with known truth, for tests, benchmarks and demos (invented data only).

A record is s(t) = A exp(-t/T2*) cos(2 pi f t + phi) + white noise of sd sigma, plus optional
interference: a mains comb (harmonic m with amplitude a_1 / m for odd m, a_1 / (3 m) for
even m, random phases), switch-off ringing A_r exp(-t/tau) sin(2 pi f_r t), impulsive
spikes, and an interference process seen by a reference channel through a gain and delay.
t is time after time zero; the record's first sample is at start_s.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class SyntheticSpec:
    sample_rate_hz: float = 48000.0
    duration_s: float = 1.0
    start_s: float = 0.0
    frequency_hz: float = 2051.3
    t2star_s: float = 0.5
    amplitude: float = 1.0
    phase_rad: float = 0.4
    noise_sd: float = 1.0
    mains_hz: float | None = None
    mains_amplitude: float = 0.0  # a_1, the fundamental's amplitude
    mains_harmonics: int = 60
    ringing_amplitude: float = 0.0
    ringing_decay_s: float = 0.002
    ringing_frequency_hz: float = 3500.0
    spike_rate_per_s: float = 0.0
    spike_amplitude: float = 0.0
    interference_sd: float = 0.0  # band-limited noise common to signal and reference
    reference_gain: float = 0.8
    reference_delay_samples: int = 3
    reference_noise_sd: float = 0.1
    extra: dict = field(default_factory=dict)

    def times_s(self) -> np.ndarray:
        return self.start_s + np.arange(int(round(self.duration_s * self.sample_rate_hz))) / self.sample_rate_hz


def fid(times_s: np.ndarray, frequency_hz: float, t2star_s: float, amplitude: float, phase_rad: float) -> np.ndarray:
    """A exp(-t/T2*) cos(2 pi f t + phi)."""
    return amplitude * np.exp(-times_s / t2star_s) * np.cos(2 * np.pi * frequency_hz * times_s + phase_rad)


def mains_comb(times_s: np.ndarray, fundamental_hz: float, amplitude: float, harmonics: int,
               rng: np.random.Generator) -> np.ndarray:
    """sum_m a_m cos(2 pi m f0 t + phi_m), a_m = a_1/m (odd m) or a_1/(3m) (even m), phi_m uniform."""
    out = np.zeros_like(times_s)
    phases = rng.uniform(0, 2 * np.pi, harmonics)
    for m in range(1, harmonics + 1):
        a = amplitude / m if m % 2 else amplitude / (3.0 * m)
        out += a * np.cos(2 * np.pi * m * fundamental_hz * times_s + phases[m - 1])
    return out


def ringing(times_s: np.ndarray, amplitude: float, decay_s: float, frequency_hz: float) -> np.ndarray:
    """A_r exp(-t/tau) sin(2 pi f_r t) for t >= 0."""
    t = np.clip(times_s, 0.0, None)
    return amplitude * np.exp(-t / decay_s) * np.sin(2 * np.pi * frequency_hz * t)


def spikes(n_samples: int, sample_rate_hz: float, rate_per_s: float, amplitude: float,
           rng: np.random.Generator) -> np.ndarray:
    """Poisson-timed bursts about 0.2 ms long, random sign and size (0.5 to 2 times amplitude)."""
    out = np.zeros(n_samples)
    width = max(2, int(0.0002 * sample_rate_hz))
    kernel = np.exp(-np.arange(width) / (width / 3.0)) * np.cos(np.arange(width) * 1.3)
    for start in rng.integers(0, max(1, n_samples - width), size=rng.poisson(rate_per_s * n_samples / sample_rate_hz)):
        out[start:start + width] += rng.choice([-1.0, 1.0]) * amplitude * rng.uniform(0.5, 2.0) * kernel
    return out


def band_noise(n_samples: int, sample_rate_hz: float, sd: float, band_hz: tuple[float, float],
               rng: np.random.Generator) -> np.ndarray:
    """Gaussian noise confined to band_hz (brick-wall in the DFT), scaled to sd."""
    spectrum = np.fft.rfft(rng.normal(size=n_samples))
    f = np.fft.rfftfreq(n_samples, 1.0 / sample_rate_hz)
    spectrum[(f < band_hz[0]) | (f > band_hz[1])] = 0
    x = np.fft.irfft(spectrum, n_samples)
    return x * sd / x.std() if x.std() > 0 else x


def make_record(spec: SyntheticSpec, seed: int) -> np.ndarray:
    """(2, n) samples: the signal channel and a reference channel (see module docstring)."""
    rng = np.random.default_rng(seed)
    t = spec.times_s()
    n = t.size
    signal = fid(t, spec.frequency_hz, spec.t2star_s, spec.amplitude, spec.phase_rad) + rng.normal(0, spec.noise_sd, n)
    reference = rng.normal(0, spec.reference_noise_sd, n)
    if spec.mains_hz is not None and spec.mains_amplitude > 0:
        hum = mains_comb(t, spec.mains_hz, spec.mains_amplitude, spec.mains_harmonics, rng)
        signal += hum
        reference += spec.reference_gain * hum
    if spec.ringing_amplitude > 0:
        signal += ringing(t, spec.ringing_amplitude, spec.ringing_decay_s, spec.ringing_frequency_hz)
    if spec.spike_rate_per_s > 0:
        burst = spikes(n, spec.sample_rate_hz, spec.spike_rate_per_s, spec.spike_amplitude, rng)
        signal += burst
        reference += spec.reference_gain * burst
    if spec.interference_sd > 0:
        d = spec.reference_delay_samples
        common = band_noise(n + d, spec.sample_rate_hz, spec.interference_sd, (500.0, 5000.0), rng)
        signal += common[d:]
        reference += common[:n] / spec.reference_gain
    return np.stack([signal, reference])
