"""Compile a `nutation` spec: an adiabatic ramp, then one pulse stepped in length or amplitude.

On resonance a rectangular pulse turns the magnetisation by theta = gamma B1_rot t, so the
FID amplitude after it follows sin(theta): zero at 180 deg, negative beyond.  The series value
is the pulse length actually played (whole samples) or the amplitude in volts.
"""

from __future__ import annotations

import math

from controller.config.sequences import NutationSequence
from controller.sequences.building import (
    CompileContext, SegmentBuilder, SpecError, check_distinct, exactly_one, check_shots_fill_cycle, fid_readout, frequency_note,
    phase_cycle_steps, pulse_frequency_hz, samples_of, shot_order,
)
from controller.sequences.timeline import Timeline


def nutation_series(spec: NutationSequence) -> tuple[tuple[float, ...], str]:
    """The stepped values and which quantity they step ('length' or 'amplitude')."""
    if exactly_one(spec, "pulse_lengths_s", "pulse_amplitudes_v", "pulse_lengths_s or pulse_amplitudes_v") == "pulse_lengths_s":
        if spec.pulse.amplitude_v is None:
            raise SpecError("pulse.amplitude_v", "missing; stepping pulse_lengths_s needs a fixed amplitude")
        check_distinct(spec.pulse_lengths_s, "pulse_lengths_s")
        return spec.pulse_lengths_s, "length"
    if spec.pulse.duration_s is None:
        raise SpecError("pulse.duration_s", "missing; stepping pulse_amplitudes_v needs a fixed length")
    check_distinct(spec.pulse_amplitudes_v, "pulse_amplitudes_v")
    return spec.pulse_amplitudes_v, "amplitude"


def compile_nutation(spec: NutationSequence, ctx: CompileContext) -> Timeline:
    """One FID per pulse length (or amplitude); pure and deterministic."""
    fs = ctx.sample_rate_hz
    steps = phase_cycle_steps(spec.phase_cycle)
    check_shots_fill_cycle(spec.shots, steps)
    values, stepped = nutation_series(spec)
    frequency = pulse_frequency_hz(spec.pulse, "pulse", ctx)
    shots = []
    for index, (point, rep) in enumerate(shot_order(len(values), spec.shots, spec.order)):
        step = steps[rep % len(steps)]
        if stepped == "length":
            n, amplitude = samples_of(values[point], fs), spec.pulse.amplitude_v
            if n < 1:
                raise SpecError(f"pulse_lengths_s[{point}]", f"{values[point]:g} s is shorter than one sample period")
            value = n / fs
        else:
            n, amplitude = max(1, samples_of(spec.pulse.duration_s, fs)), values[point]
            value = amplitude
        b = SegmentBuilder(fs, spec.polarise.duration_s, spec.polarise.current_a, spec.switch_off)
        start = b.ramp_end_sample + samples_of(spec.excite_delay_s, fs)
        b.pulse(start, n, frequency, math.radians(spec.pulse.phase_deg) + step.excite_rad, amplitude)
        end = fid_readout(b, start + n, spec.receive, step.receiver_rad)
        shots.append(b.finish(index, end, spec.recovery_s, series_index=point, series_value=value,
                              cycle_step=rep % len(steps)))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs, shots=tuple(shots),
                    notes=frequency_note(ctx, [spec.pulse]), larmor_hz=ctx.larmor_hz,
                    series_name=f"pulse {stepped}", series_unit="s" if stepped == "length" else "V")
