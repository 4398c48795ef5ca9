"""Compile a `fid` sequence spec into a Timeline.

Shot layout (times from the shot's start):

    0 ........ polarise (current_a, duration_s) ........ tp
    tp - lead  sample-locked segment begins (lead = 5 ms of baseline before switch-off)
    tp         switch-off ramp (ramp_s)
    tp + ramp [+ pulse delay, pulse, ] + dead time: acquisition for acquire_s
    then recovery_s with the coil off.

With a phase cycle, shot i uses step i mod (cycle length): its offsets are added to the
pulse phase and to the receiver phase.
"""

from __future__ import annotations

import math

from controller.config.schema import FidSequence
from controller.sequences.building import (
    SEGMENT_LEAD_S, CompileContext, SegmentBuilder, SpecError, check_shots_fill_cycle, fid_readout, frequency_note,
    phase_cycle_steps, pulse_frequency_hz, pulse_samples, samples_of,
)
from controller.sequences.timeline import Timeline

__all__ = ["compile_fid", "samples_of", "SEGMENT_LEAD_S"]


def compile_fid(spec: FidSequence, ctx: CompileContext) -> Timeline:
    """Compile a FID spec; pure and deterministic."""
    fs = ctx.sample_rate_hz
    steps = phase_cycle_steps(spec.phase_cycle)
    check_shots_fill_cycle(spec.shots, steps)
    if spec.pulse is None and len(steps) > 1:
        raise SpecError("phase_cycle", "needs a pulse to act on; a FID after sudden switch-off has none")
    shots = []
    for i in range(spec.shots):
        step = steps[i % len(steps)]
        b = SegmentBuilder(fs, spec.polarise.duration_s, spec.polarise.current_a, spec.switch_off)
        cursor = b.ramp_end_sample
        if spec.pulse is not None:
            n = pulse_samples(spec.pulse, "pulse", ctx)
            start = cursor + samples_of(spec.pulse.delay_s, fs)
            b.pulse(start, n, pulse_frequency_hz(spec.pulse, "pulse", ctx),
                    math.radians(spec.pulse.phase_deg) + step.excite_rad, spec.pulse.amplitude_v)
            cursor = start + n
        end = fid_readout(b, cursor, spec.receive, step.receiver_rad)
        shots.append(b.finish(i, end, spec.recovery_s, cycle_step=i % len(steps)))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs, shots=tuple(shots),
                    notes=frequency_note(ctx, [spec.pulse]), larmor_hz=ctx.larmor_hz)
