"""Compile the two T1 series: `t1-polarise` and `t1-earth`.

t1-polarise: one FID per polarising time tp; the magnetisation built up at the polarising
field is M(tp) = M0 (1 - exp(-tp/T1)) [Bloch 1946], read out by a sudden switch-off or an
adiabatic ramp and a 90 deg pulse.

t1-earth: polarise for a fixed time, ramp down adiabatically (M follows the field and ends
along the Earth's field), wait a delay td, then a 90 deg pulse: M(td) decays towards the tiny
Earth's-field equilibrium with the Earth's-field T1.  The series value is td, from the end of
the ramp to the start of the pulse.
"""

from __future__ import annotations

import math

from controller.config.sequences import T1EarthSequence, T1PolariseSequence
from controller.sequences.building import (
    CompileContext, SegmentBuilder, check_distinct, check_shots_fill_cycle, fid_readout, frequency_note,
    phase_cycle_steps, pulse_frequency_hz, pulse_samples, samples_of, shot_order, SpecError,
)
from controller.sequences.timeline import Timeline


def compile_t1_polarise(spec: T1PolariseSequence, ctx: CompileContext) -> Timeline:
    """One FID per polarising time; pure and deterministic."""
    fs = ctx.sample_rate_hz
    steps = phase_cycle_steps(spec.phase_cycle)
    check_shots_fill_cycle(spec.shots, steps)
    check_distinct(spec.polarise_times_s, "polarise_times_s")
    if spec.pulse is None and len(steps) > 1:
        raise SpecError("phase_cycle", "needs a pulse to act on; a FID after sudden switch-off has none")
    n_pulse = pulse_samples(spec.pulse, "pulse", ctx) if spec.pulse is not None else 0
    shots = []
    for index, (point, rep) in enumerate(shot_order(len(spec.polarise_times_s), spec.shots, spec.order)):
        step = steps[rep % len(steps)]
        b = SegmentBuilder(fs, spec.polarise_times_s[point], spec.polarise.current_a, spec.switch_off)
        cursor = b.ramp_end_sample
        if spec.pulse is not None:
            start = cursor + samples_of(spec.excite_delay_s, fs)
            b.pulse(start, n_pulse, pulse_frequency_hz(spec.pulse, "pulse", ctx),
                    math.radians(spec.pulse.phase_deg) + step.excite_rad, spec.pulse.amplitude_v)
            cursor = start + n_pulse
        end = fid_readout(b, cursor, spec.receive, step.receiver_rad)
        shots.append(b.finish(index, end, spec.recovery_s, series_index=point,
                              series_value=b.events[0].duration_s, cycle_step=rep % len(steps)))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs, shots=tuple(shots),
                    notes=frequency_note(ctx, [spec.pulse]), larmor_hz=ctx.larmor_hz,
                    series_name="polarising time", series_unit="s")


def compile_t1_earth(spec: T1EarthSequence, ctx: CompileContext) -> Timeline:
    """One FID per delay in the Earth's field after an adiabatic ramp; pure and deterministic."""
    fs = ctx.sample_rate_hz
    steps = phase_cycle_steps(spec.phase_cycle)
    check_shots_fill_cycle(spec.shots, steps)
    check_distinct(spec.earth_delays_s, "earth_delays_s")
    n_pulse = pulse_samples(spec.pulse, "pulse", ctx)
    frequency = pulse_frequency_hz(spec.pulse, "pulse", ctx)
    shots = []
    for index, (point, rep) in enumerate(shot_order(len(spec.earth_delays_s), spec.shots, spec.order)):
        step = steps[rep % len(steps)]
        b = SegmentBuilder(fs, spec.polarise.duration_s, spec.polarise.current_a, spec.switch_off)
        delay_n = samples_of(spec.earth_delays_s[point], fs)
        start = b.ramp_end_sample + delay_n
        b.pulse(start, n_pulse, frequency, math.radians(spec.pulse.phase_deg) + step.excite_rad, spec.pulse.amplitude_v)
        end = fid_readout(b, start + n_pulse, spec.receive, step.receiver_rad)
        shots.append(b.finish(index, end, spec.recovery_s, series_index=point, series_value=delay_n / fs,
                              cycle_step=rep % len(steps)))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs, shots=tuple(shots),
                    notes=frequency_note(ctx, [spec.pulse]), larmor_hz=ctx.larmor_hz,
                    series_name="delay in the Earth's field", series_unit="s")
