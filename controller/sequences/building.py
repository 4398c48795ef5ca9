"""Building blocks the sequence compilers share: sample quantisation, pulses, phase cycles, shots.

Every time is turned into a whole number of sample periods once, here, so that all events of
a shot sit exactly on the converter clock.  A shot's sample-locked segment starts
SEGMENT_LEAD_S before the switch-off (a baseline before the edge) or, with no polarising
current, at the shot's start.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Iterator

from controller.calibration import PulseCalibration
from controller.config.schema import PhaseCycleSpec, ReceiveSpec, SwitchOffSpec
from controller.sequences.timeline import (
    Acquire, EchoCentre, Polarise, Pulse, Recover, ShotPlan, SwitchOff,
)

SEGMENT_LEAD_S = 0.005


class SpecError(ValueError):
    """A sequence spec that cannot be compiled; `key` is the spec key at fault."""

    def __init__(self, key: str, message: str) -> None:
        self.key = key
        super().__init__(f"{key}: {message}")
        self.message = message


@dataclass(frozen=True)
class CompileContext:
    """What a compiler needs besides the spec: the clock, the Larmor frequency and the pulse calibration."""

    sample_rate_hz: float
    larmor_hz: float | None = None
    larmor_source: str = "predicted"
    calibration: PulseCalibration | None = None


def samples_of(duration_s: float, sample_rate_hz: float) -> int:
    """Number of whole sample periods nearest to duration_s."""
    return int(round(duration_s * sample_rate_hz))


def quantise_s(duration_s: float, sample_rate_hz: float) -> float:
    """duration_s rounded to whole sample periods."""
    return samples_of(duration_s, sample_rate_hz) / sample_rate_hz


def pulse_frequency_hz(pulse: Any, key: str, ctx: CompileContext) -> float:
    """The pulse's own frequency_hz, else the context's Larmor frequency."""
    if pulse.frequency_hz is not None:
        return float(pulse.frequency_hz)
    if ctx.larmor_hz is None:
        raise SpecError(f"{key}.frequency_hz", "not set and no Larmor frequency is known (no site, no measurement)")
    return float(ctx.larmor_hz)


def pulse_samples(pulse: Any, key: str, ctx: CompileContext, amplitude_v: float | None = None) -> int:
    """Pulse length in samples from duration_s, or from flip_deg and the calibration."""
    duration = getattr(pulse, "duration_s", None)
    flip = getattr(pulse, "flip_deg", None)
    if duration is not None and flip is not None:
        raise SpecError(key, "give duration_s or flip_deg, not both")
    if duration is None:
        if flip is None:
            raise SpecError(key, "needs duration_s or flip_deg")
        if ctx.calibration is None:
            raise SpecError(f"{key}.flip_deg", "needs a pulse calibration (set calibration = \"FILE\" from a "
                                               "nutation run) or give duration_s")
        duration = ctx.calibration.duration_for_s(flip, amplitude_v if amplitude_v is not None else pulse.amplitude_v)
    n = samples_of(duration, ctx.sample_rate_hz)
    if n < 1:
        raise SpecError(key, f"{duration:g} s is shorter than one sample period ({1 / ctx.sample_rate_hz:g} s)")
    return n


@dataclass(frozen=True)
class CycleStep:
    excite_rad: float
    refocus_rad: float
    receiver_rad: float


def phase_cycle_steps(cycle: PhaseCycleSpec) -> tuple[CycleStep, ...]:
    """The steps of a phase cycle; every list has one entry per step or exactly one entry."""
    lists = {"excite_deg": cycle.excite_deg, "refocus_deg": cycle.refocus_deg, "receiver_deg": cycle.receiver_deg}
    n = max(len(v) for v in lists.values())
    for key, values in lists.items():
        if len(values) not in (1, n):
            raise SpecError(f"phase_cycle.{key}", f"has {len(values)} entries; allowed: 1 or {n} (the cycle length)")

    def at(values: tuple[float, ...], i: int) -> float:
        return math.radians(values[i if len(values) > 1 else 0])

    return tuple(CycleStep(at(cycle.excite_deg, i), at(cycle.refocus_deg, i), at(cycle.receiver_deg, i))
                 for i in range(n))


def check_shots_fill_cycle(shots: int, steps: tuple[CycleStep, ...]) -> None:
    if shots % len(steps):
        raise SpecError("shots", f"{shots} is not a whole number of phase cycles of {len(steps)} steps; "
                                 f"allowed: a multiple of {len(steps)}")


def shot_order(points: int, shots: int, order: str) -> Iterator[tuple[int, int]]:
    """(point, repetition) pairs: interleaved runs every point once per pass, sequential finishes a point first."""
    if order == "sequential":
        return ((p, r) for p in range(points) for r in range(shots))
    return ((p, r) for r in range(shots) for p in range(points))


def exactly_one(spec: Any, key_a: str, key_b: str, what: str) -> str:
    """The one of two keys the spec sets; a SpecError if it sets both or neither."""
    a_set, b_set = getattr(spec, key_a) is not None, getattr(spec, key_b) is not None
    if a_set == b_set:
        raise SpecError(key_a, f"give {what}, not both or neither")
    return key_a if a_set else key_b


def check_distinct(values: tuple[float, ...], key: str) -> None:
    if len(set(values)) < len(values):
        raise SpecError(key, "holds the same value twice; allowed: distinct values")


@dataclass
class SegmentBuilder:
    """Collects one shot's events.  Sample indices count from the segment's first sample."""

    sample_rate_hz: float
    polarise_s: float = 0.0
    current_a: float = 0.0
    switch_off: SwitchOffSpec | None = None
    events: list = field(default_factory=list)

    def __post_init__(self) -> None:
        fs = self.sample_rate_hz
        if self.current_a > 0:
            tp = quantise_s(self.polarise_s, fs)
            lead_n = samples_of(SEGMENT_LEAD_S, fs)
            spec = self.switch_off or SwitchOffSpec()
            ramp_n = max(1, samples_of(spec.ramp_s, fs))
            self.segment_start_s = tp - lead_n / fs
            self.events += [Polarise(start_s=0.0, duration_s=tp, current_a=self.current_a),
                            SwitchOff(start_s=tp, ramp_s=ramp_n / fs, shape=spec.shape, start_sample=lead_n)]
            self.ramp_end_sample = lead_n + ramp_n
        else:
            self.segment_start_s = 0.0
            self.ramp_end_sample = 0

    def at_s(self, sample: float) -> float:
        return self.segment_start_s + sample / self.sample_rate_hz

    def pulse(self, start: int, n: int, frequency_hz: float, phase_rad: float, amplitude_v: float) -> Pulse:
        p = Pulse(start_s=self.at_s(start), duration_s=n / self.sample_rate_hz, frequency_hz=frequency_hz,
                  phase_rad=math.remainder(phase_rad, 2 * math.pi), amplitude_v=amplitude_v,
                  start_sample=start, n_samples=n)
        self.events.append(p)
        return p

    def acquire(self, start: int, n: int, receiver_phase_rad: float) -> None:
        self.events.append(Acquire(start_s=self.at_s(start), duration_s=n / self.sample_rate_hz, start_sample=start,
                                   n_samples=n, receiver_phase_rad=math.remainder(receiver_phase_rad, 2 * math.pi)))

    def echo_centre(self, sample: int, index: int, excitation_sample: float) -> None:
        self.events.append(EchoCentre(start_s=self.at_s(sample), sample=sample, index=index,
                                      echo_time_s=(sample - excitation_sample) / self.sample_rate_hz))

    def finish(self, index: int, end_sample: int, recovery_s: float, *, series_index: int = 0,
               series_value: float | None = None, cycle_step: int = 0) -> ShotPlan:
        fs = self.sample_rate_hz
        recovery = quantise_s(recovery_s, fs)
        events = sorted(self.events, key=lambda e: e.start_s)
        events.append(Recover(start_s=self.at_s(end_sample), duration_s=recovery))
        return ShotPlan(index=index, events=tuple(events), segment_start_s=self.segment_start_s,
                        segment_samples=end_sample, duration_s=self.at_s(end_sample) + recovery,
                        series_index=series_index, series_value=series_value, cycle_step=cycle_step)


def fid_readout(builder: SegmentBuilder, start: int, receive: ReceiveSpec, receiver_phase_rad: float) -> int:
    """Acquisition from `start` + dead time for acquire_s; returns the segment's end sample."""
    fs = builder.sample_rate_hz
    acq_start = start + samples_of(receive.dead_time_s, fs)
    acq_n = samples_of(receive.acquire_s, fs)
    builder.acquire(acq_start, acq_n, receiver_phase_rad)
    return acq_start + acq_n


def frequency_note(ctx: CompileContext, pulses: list[Any]) -> tuple[str, ...]:
    if any(p is not None and p.frequency_hz is None for p in pulses) and ctx.larmor_hz is not None:
        return (f"pulse frequency {ctx.larmor_hz:.3f} Hz from the {ctx.larmor_source}",)
    return ()
