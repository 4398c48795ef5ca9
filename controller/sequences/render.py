"""Render a shot's sample-locked segment into output waveforms (pure).

Outputs, one sample per converter period from the segment's first sample:

* ``gate``: the commanded fraction of the polarising current, 1 before switch-off, falling
  over the ramp to 0.  Linear ramp g = 1 - n/N; exponential ramp g = exp(-5 n/N) cut to 0
  at N (five time constants).  Real rigs take the falling edge as the switch-off marker.
* ``tx``: the transmit waveform, A cos(2 pi f t + phi) during each pulse, with t counted
  from the segment's first sample so the phase is exact on the sample clock.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from controller.sequences.timeline import Pulse, ShotPlan, SwitchOff


@dataclass(frozen=True)
class SegmentWaveforms:
    sample_rate_hz: float
    gate: np.ndarray
    tx: np.ndarray

    @property
    def n_samples(self) -> int:
        return int(self.gate.size)


def ramp_fraction(shape: str, k: np.ndarray | float) -> np.ndarray:
    """The commanded fraction of the polarising current at k = t / ramp time (0 <= k < 1).

    Linear g = 1 - k; exponential g = exp(-5 k), cut to 0 at k = 1 (five time constants).
    """
    k = np.asarray(k, dtype=float)
    return 1.0 - k if shape == "linear" else np.exp(-5.0 * k)


def render_segment(shot: ShotPlan, sample_rate_hz: float) -> SegmentWaveforms:
    n = shot.segment_samples
    gate = np.zeros(n)
    tx = np.zeros(n)
    for off in shot.of_kind(SwitchOff):
        gate[: off.start_sample] = 1.0
        ramp_n = max(1, int(round(off.ramp_s * sample_rate_hz)))
        k = np.arange(ramp_n) / ramp_n
        stop = min(n, off.start_sample + ramp_n)
        shape = ramp_fraction(off.shape, k)
        gate[off.start_sample:stop] = shape[: stop - off.start_sample]
    for p in shot.of_kind(Pulse):
        idx = np.arange(p.start_sample, min(n, p.start_sample + p.n_samples))
        t = idx / sample_rate_hz
        tx[idx] += p.amplitude_v * np.cos(2.0 * np.pi * p.frequency_hz * t + p.phase_rad)
    gate.setflags(write=False)
    tx.setflags(write=False)
    return SegmentWaveforms(sample_rate_hz=sample_rate_hz, gate=gate, tx=tx)
