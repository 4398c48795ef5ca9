"""Say a timeline in words, for `precess check`."""

from __future__ import annotations

from controller.sequences.timeline import Acquire, Polarise, Pulse, Recover, SwitchOff, Timeline


def _ms(t: float) -> str:
    return f"{t * 1e3:10.3f} ms"


def describe_event(event: object) -> str:
    if isinstance(event, Polarise):
        return f"{_ms(event.start_s)}  polarise {event.current_a:g} A for {event.duration_s:g} s"
    if isinstance(event, SwitchOff):
        return (f"{_ms(event.start_s)}  switch off: {event.shape} ramp to 0 A in {event.ramp_s * 1e3:g} ms"
                f" (segment sample {event.start_sample})")
    if isinstance(event, Pulse):
        return (f"{_ms(event.start_s)}  pulse {event.amplitude_v:g} V at {event.frequency_hz:.3f} Hz for "
                f"{event.duration_s * 1e3:g} ms, phase {event.phase_rad:.3f} rad ({event.n_samples} samples)")
    if isinstance(event, Acquire):
        return (f"{_ms(event.start_s)}  acquire {event.duration_s:g} s ({event.n_samples} samples, "
                f"from segment sample {event.start_sample})")
    if isinstance(event, Recover):
        return f"{_ms(event.start_s)}  coil off, recover for {event.duration_s:g} s"
    return f"{event!r}"


def describe_timeline(timeline: Timeline) -> list[str]:
    """Lines describing the first shot in full and the run in total."""
    lines = [
        f"sequence {timeline.sequence_name!r} ({timeline.sequence_kind}), {len(timeline.shots)} shot(s), "
        f"sample clock {timeline.sample_rate_hz:g} Hz, total {timeline.duration_s:.3f} s",
    ]
    lines += [f"  note: {n}" for n in timeline.notes]
    if timeline.shots:
        shot = timeline.shots[0]
        lines.append(f"shot 0 ({shot.duration_s:.3f} s; sample-locked segment from {shot.segment_start_s * 1e3:.3f} ms,"
                     f" {shot.segment_samples} samples):")
        lines += ["  " + describe_event(e) for e in shot.events]
        if len(timeline.shots) > 1:
            lines.append(f"shots 1..{len(timeline.shots) - 1} repeat shot 0")
    return lines
