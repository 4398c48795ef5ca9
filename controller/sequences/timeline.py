"""The timeline: plain, frozen data on the sample clock.

A shot is a list of events with start times in seconds from the shot's start, every time a
whole number of sample periods.  Two parts exist in every shot:

* the host-timed part (polarising current on, held for seconds) where a few milliseconds of
  host jitter do not matter;
* the sample-locked segment, from just before switch-off to the end of acquisition, played
  and recorded on one converter clock.  Its events carry sample indices relative to the
  segment's first sample.
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Polarise:
    """Polarising current on at start_s for duration_s (host-timed)."""

    start_s: float
    duration_s: float
    current_a: float


@dataclass(frozen=True)
class SwitchOff:
    """The polarising current ramps from its value to zero in ramp_s (sample-locked)."""

    start_s: float
    ramp_s: float
    shape: str
    start_sample: int


@dataclass(frozen=True)
class Pulse:
    """A transmit burst at frequency_hz with phase_rad relative to the segment's first sample."""

    start_s: float
    duration_s: float
    frequency_hz: float
    phase_rad: float
    amplitude_v: float
    start_sample: int
    n_samples: int


@dataclass(frozen=True)
class Acquire:
    """The receiver is open (after the dead time) and the samples count as signal."""

    start_s: float
    duration_s: float
    start_sample: int
    n_samples: int
    receiver_phase_rad: float = 0.0


@dataclass(frozen=True)
class Recover:
    """Coil off; wait before the next shot."""

    start_s: float
    duration_s: float


Event = Polarise | SwitchOff | Pulse | Acquire | Recover


@dataclass(frozen=True)
class ShotPlan:
    """One shot: its events and where its sample-locked segment lies."""

    index: int
    events: tuple[Event, ...]
    segment_start_s: float
    segment_samples: int
    duration_s: float

    def of_kind(self, kind: type) -> tuple:
        return tuple(e for e in self.events if isinstance(e, kind))


@dataclass(frozen=True)
class Timeline:
    """What a run does, shot by shot, on a converter clock of sample_rate_hz."""

    sequence_name: str
    sequence_kind: str
    sample_rate_hz: float
    shots: tuple[ShotPlan, ...]
    notes: tuple[str, ...] = field(default=())

    @property
    def duration_s(self) -> float:
        return sum(s.duration_s for s in self.shots)
