"""The small Protocols every driver implements.

Safe-state methods (`output_off`, `silence`, `set_path("idle")`) are idempotent and never
raise for "already off".  Transport (serial port, VISA session, audio stream) is separate
from the command vocabulary.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol, runtime_checkable

import numpy as np


@runtime_checkable
class CurrentSupply(Protocol):
    """The polarising current source."""

    def set_current(self, current_a: float) -> None: ...

    def read_current(self) -> float: ...

    def read_voltage(self) -> float: ...

    def output_off(self) -> None: ...

    def describe(self) -> dict[str, Any]: ...


@dataclass(frozen=True)
class Recording:
    """What a transceiver captured during one sample-locked segment.

    samples: (n_channels, n_samples) in volts at the converter input.
    latency_samples: output->input delay already removed (sample 0 is the segment's first sample).
    """

    samples: np.ndarray
    channel_names: tuple[str, ...]
    sample_rate_hz: float
    started_at_s: float
    latency_samples: int = 0
    overrun: bool = False
    notes: tuple[str, ...] = field(default=())


@runtime_checkable
class Transceiver(Protocol):
    """Plays the transmit and gate waveforms and records the coil on one sample clock."""

    sample_rate_hz: float

    def play_and_record(self, gate: np.ndarray, tx: np.ndarray) -> Recording: ...

    def silence(self) -> None: ...

    def describe(self) -> dict[str, Any]: ...


@runtime_checkable
class SwitchBoard(Protocol):
    """Switches the coil between idle / polarise / transmit / receive and reads sensors."""

    def set_path(self, path: str) -> None: ...

    def read_sensors(self) -> dict[str, float]: ...

    def describe(self) -> dict[str, Any]: ...


@runtime_checkable
class TimedSegmentBoard(Protocol):
    """A board that runs the switch-off -> transmit -> receive segment on its own timer (optional).

    The engine arms it just before the transceiver plays the segment and asks afterwards
    how it went; `finish_segment` returns (bad, notes) for the shot.
    """

    def arm_segment(self, gate: np.ndarray, tx: np.ndarray, sample_rate_hz: float) -> None: ...

    def finish_segment(self) -> tuple[bool, tuple[str, ...]]: ...
