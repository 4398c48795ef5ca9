"""Say a timeline in words, for `precess check`."""

from __future__ import annotations

import math

from controller.sequences.timeline import Acquire, EchoCentre, Polarise, Pulse, Recover, ShotPlan, SwitchOff, Timeline

EVENTS_SHOWN = 12


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
                f"{event.duration_s * 1e3:g} ms, phase {math.degrees(event.phase_rad):.1f} deg "
                f"({event.n_samples} samples from segment sample {event.start_sample})")
    if isinstance(event, Acquire):
        phase = f", receiver phase {math.degrees(event.receiver_phase_rad):.1f} deg" if event.receiver_phase_rad else ""
        return (f"{_ms(event.start_s)}  acquire {event.duration_s:g} s ({event.n_samples} samples, "
                f"from segment sample {event.start_sample}{phase})")
    if isinstance(event, EchoCentre):
        return f"{_ms(event.start_s)}  echo {event.index + 1} expected (TE {event.echo_time_s * 1e3:.3f} ms)"
    if isinstance(event, Recover):
        return f"{_ms(event.start_s)}  coil off, recover for {event.duration_s:g} s"
    return f"{event!r}"


def _shot_lines(shot: ShotPlan) -> list[str]:
    events = list(shot.events)
    lines = [describe_event(e) for e in events[:EVENTS_SHOWN]]
    if len(events) > EVENTS_SHOWN:
        lines.append(f"... {len(events) - EVENTS_SHOWN - 1} more events ...")
        lines.append(describe_event(events[-1]))
    return lines


def describe_timeline(timeline: Timeline) -> list[str]:
    """Lines describing the first shot in full, the series and phase cycle, and the run in total."""
    lines = [
        f"sequence {timeline.sequence_name!r} ({timeline.sequence_kind}), {len(timeline.shots)} shot(s), "
        f"sample clock {timeline.sample_rate_hz:g} Hz, total {timeline.duration_s:.3f} s",
    ]
    lines += [f"  note: {n}" for n in timeline.notes]
    if not timeline.shots:
        return lines
    shot = timeline.shots[0]
    lines.append(f"shot 0 ({shot.duration_s:.3f} s; sample-locked segment from {shot.segment_start_s * 1e3:.3f} ms,"
                 f" {shot.segment_samples} samples):")
    lines += ["  " + line for line in _shot_lines(shot)]
    if timeline.series_name:
        points: dict[int, float | None] = {}
        counts: dict[int, int] = {}
        for s in timeline.shots:
            points.setdefault(s.series_index, s.series_value)
            counts[s.series_index] = counts.get(s.series_index, 0) + 1
        values = ", ".join(f"{points[i]:.6g}" for i in sorted(points))
        lines.append(f"series of {len(points)} points, {timeline.series_name} ({timeline.series_unit}): {values}; "
                     f"{counts[min(counts)]} shot(s) each")
    steps = max(s.cycle_step for s in timeline.shots) + 1
    if steps > 1:
        lines.append(f"phase cycle of {steps} steps; each point's shots step through it")
    if len(timeline.shots) > 1 and not timeline.series_name:
        n = len(timeline.shots)
        lines.append((f"shots 1..{n - 1} repeat shot 0" if n > 2 else "shot 1 repeats shot 0")
                     + (" with the phase cycle" if steps > 1 else ""))
    return lines
