"""Compile a `fid` sequence spec into a Timeline.

Shot layout (times from the shot's start):

    0 ........ polarise (current_a, duration_s) ........ tp
    tp - lead  sample-locked segment begins (lead = 5 ms of baseline before switch-off)
    tp         switch-off ramp (ramp_s)
    tp + ramp [+ pulse delay, pulse, ] + dead time: acquisition for acquire_s
    then recovery_s with the coil off.
"""

from __future__ import annotations

import math

from controller.config.schema import FidSequence
from controller.sequences.timeline import Acquire, Polarise, Pulse, Recover, ShotPlan, SwitchOff, Timeline

SEGMENT_LEAD_S = 0.005


def samples_of(duration_s: float, sample_rate_hz: float) -> int:
    """Number of whole sample periods nearest to duration_s."""
    return int(round(duration_s * sample_rate_hz))


def compile_fid(spec: FidSequence, sample_rate_hz: float, larmor_hz: float | None = None) -> Timeline:
    """Compile a FID spec; pure and deterministic.

    larmor_hz is the predicted Larmor frequency used when the pulse gives no frequency_hz.
    """
    fs = sample_rate_hz
    q = lambda t: samples_of(t, fs) / fs  # noqa: E731 - quantise to the sample clock
    tp = q(spec.polarise.duration_s)
    lead_n = samples_of(SEGMENT_LEAD_S, fs)
    seg_start = tp - lead_n / fs
    ramp_n = max(1, samples_of(spec.switch_off.ramp_s, fs))
    cursor_n = lead_n + ramp_n  # samples from segment start to the end of the ramp
    notes: list[str] = []
    events_common: list = []
    pulse = None
    if spec.pulse is not None:
        freq = spec.pulse.frequency_hz if spec.pulse.frequency_hz is not None else larmor_hz
        if freq is None:
            raise ValueError("pulse.frequency_hz is not set and no predicted Larmor frequency is known")
        if spec.pulse.frequency_hz is None:
            notes.append(f"pulse frequency {freq:.3f} Hz from the site's predicted field")
        p_start_n = cursor_n + samples_of(spec.pulse.delay_s, fs)
        p_n = max(1, samples_of(spec.pulse.duration_s, fs))
        pulse = Pulse(
            start_s=seg_start + p_start_n / fs,
            duration_s=p_n / fs,
            frequency_hz=float(freq),
            phase_rad=math.radians(spec.pulse.phase_deg),
            amplitude_v=spec.pulse.amplitude_v,
            start_sample=p_start_n,
            n_samples=p_n,
        )
        cursor_n = p_start_n + p_n
    acq_start_n = cursor_n + samples_of(spec.receive.dead_time_s, fs)
    acq_n = samples_of(spec.receive.acquire_s, fs)
    segment_n = acq_start_n + acq_n
    shot_duration = seg_start + segment_n / fs + q(spec.recovery_s)
    shots = []
    for i in range(spec.shots):
        events: list = [
            Polarise(start_s=0.0, duration_s=tp, current_a=spec.polarise.current_a),
            SwitchOff(start_s=tp, ramp_s=ramp_n / fs, shape=spec.switch_off.shape, start_sample=lead_n),
        ]
        if pulse is not None:
            events.append(pulse)
        events.append(Acquire(start_s=seg_start + acq_start_n / fs, duration_s=acq_n / fs,
                              start_sample=acq_start_n, n_samples=acq_n))
        events.append(Recover(start_s=seg_start + segment_n / fs, duration_s=q(spec.recovery_s)))
        events.extend(events_common)
        shots.append(ShotPlan(index=i, events=tuple(events), segment_start_s=seg_start,
                              segment_samples=segment_n, duration_s=shot_duration))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs,
                    shots=tuple(shots), notes=tuple(notes))
