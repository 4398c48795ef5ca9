"""The timeline: plain, frozen data on the sample clock.

A shot is a list of events with start times in seconds from the shot's start, every time a
whole number of sample periods.  Two parts exist in every shot:

* the host-timed part (polarising current on, held for seconds) where a few milliseconds of
  host jitter do not matter;
* the sample-locked segment, from just before switch-off to the end of acquisition, played
  and recorded on one converter clock.  Its events carry sample indices relative to the
  segment's first sample.

A shot of a series carries its point (``series_index``, ``series_value``) and its step in the
phase cycle; marks such as ``EchoCentre`` tell the analysis where to look and are ignored by
the engine.
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
class EchoCentre:
    """Where echo `index` is expected, echo_time_s after the excitation (a mark; nothing is played)."""

    start_s: float
    sample: int
    index: int = 0
    echo_time_s: float = 0.0


@dataclass(frozen=True)
class Recover:
    """Coil off; wait before the next shot."""

    start_s: float
    duration_s: float


Event = Polarise | SwitchOff | Pulse | Acquire | EchoCentre | Recover


@dataclass(frozen=True)
class ShotPlan:
    """One shot: its events and where its sample-locked segment lies."""

    index: int
    events: tuple[Event, ...]
    segment_start_s: float
    segment_samples: int
    duration_s: float
    series_index: int = 0
    series_value: float | None = None
    cycle_step: int = 0

    def of_kind(self, kind: type) -> tuple:
        return tuple(e for e in self.events if isinstance(e, kind))

    def acquisition_span(self) -> tuple[int, int]:
        """(first sample, sample count) from the first acquisition's start to the last one's end."""
        windows = self.of_kind(Acquire)
        if not windows:
            return 0, 0
        start = windows[0].start_sample
        return start, windows[-1].start_sample + windows[-1].n_samples - start

    def time_zero_sample(self, sample_rate_hz: float) -> int:
        """The last excitation edge before the first acquisition: end of the last pulse before it,
        else end of the switch-off ramp, else 0.  The dead time is measured from here."""
        first, _ = self.acquisition_span()
        ends = [p.start_sample + p.n_samples for p in self.of_kind(Pulse) if p.start_sample + p.n_samples <= first]
        if ends:
            return max(ends)
        offs = self.of_kind(SwitchOff)
        if offs:
            return offs[0].start_sample + int(round(offs[0].ramp_s * sample_rate_hz))
        return 0


@dataclass(frozen=True)
class Timeline:
    """What a run does, shot by shot, on a converter clock of sample_rate_hz."""

    sequence_name: str
    sequence_kind: str
    sample_rate_hz: float
    shots: tuple[ShotPlan, ...]
    notes: tuple[str, ...] = field(default=())
    larmor_hz: float | None = None
    series_name: str = ""
    series_unit: str = ""

    @property
    def duration_s(self) -> float:
        return sum(s.duration_s for s in self.shots)
