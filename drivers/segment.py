"""Read the sample-locked segment's timing back out of its gate and transmit waveforms (pure).

The engine hands every transceiver the same two arrays (controller.sequences.render): the
gate, the commanded fraction of polarising current (1 before switch-off, then a ramp to 0),
and the transmit waveform.  Hardware that realises the segment on its own timer (the serial
board) or as a marker (the sound card) needs the instants, not the arrays.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MAX_GAP_IN_PULSE = 2  # samples: zero runs this short inside a pulse are part of it


@dataclass(frozen=True)
class SegmentEdges:
    """Sample indices within the segment (counted from its first sample)."""

    n_samples: int
    switch_off_sample: int  # the ramp's first sample: the last with gate 1 (n_samples if the gate never falls)
    ramp_end_sample: int  # first sample at or after switch-off with gate <= 0
    shape: str  # "linear" or "exponential"
    tx_windows: tuple[tuple[int, int], ...]  # (start, stop) of each pulse: runs of non-zero transmit samples


def segment_edges(gate: np.ndarray, tx: np.ndarray) -> SegmentEdges:
    """Find switch-off, the ramp's end, its shape and the transmit windows.

    The shape is "linear" when the gate half-way through the ramp is within 0.1 of 0.5
    (a linear ramp g = 1 - n/N), else "exponential" (g = exp(-5 n/N) is 0.08 there).
    """
    g = np.asarray(gate, dtype=float)
    t = np.asarray(tx, dtype=float)
    n = int(g.size)
    below = np.flatnonzero(g < 1.0)
    k_off = max(0, int(below[0]) - 1) if below.size else n
    zero = np.flatnonzero(g[k_off:] <= 0.0)
    k_end = k_off + int(zero[0]) if zero.size else n
    mid = (k_off + k_end) // 2
    shape = "linear" if k_end - k_off < 2 or abs(g[mid] - 0.5) < 0.1 else "exponential"
    on = np.concatenate([[0], (t != 0).astype(np.int8), [0]])
    changes = np.flatnonzero(np.diff(on))
    windows: list[tuple[int, int]] = []
    for a, b in zip(changes[0::2], changes[1::2]):
        if windows and a - windows[-1][1] <= MAX_GAP_IN_PULSE:  # a sample of a sine that happens to be 0
            windows[-1] = (windows[-1][0], int(b))
        else:
            windows.append((int(a), int(b)))
    return SegmentEdges(n_samples=n, switch_off_sample=k_off, ramp_end_sample=k_end, shape=shape,
                        tx_windows=tuple(windows))


def samples_to_us(samples: int, sample_rate_hz: float) -> int:
    """Whole microseconds nearest to a sample count."""
    return int(round(samples * 1e6 / sample_rate_hz))
