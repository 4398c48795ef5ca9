"""Compile an `echo` (Hahn spin echo) spec into a Timeline.

Excitation at sample c0: the end of a sudden switch-off ramp, or the centre of the excite
pulse.  The refocusing pulse is centred at c0 + TE/2 and the echo at c0 + TE (Hahn, Phys.
Rev. 80:580 (1950)).  The receiver opens a dead time after the refocusing pulse and must
reach half the echo window on both sides of the echo centre, so

    TE >= t_refocus + 2 t_dead + w        and, with an excite pulse, TE >= t_excite + t_refocus.

The refocusing pulse's phase is the excite pulse's phase (if any) plus refocus.phase_deg plus
the phase cycle's refocus offset.
"""

from __future__ import annotations

import math

from controller.config.sequences import EchoSequence
from controller.sequences.building import (
    CompileContext, SegmentBuilder, SpecError, check_distinct, exactly_one, check_shots_fill_cycle, frequency_note,
    phase_cycle_steps, pulse_frequency_hz, pulse_samples, samples_of, shot_order,
)
from controller.sequences.timeline import Timeline


def echo_times(spec: EchoSequence) -> tuple[tuple[float, ...], str]:
    """The echo times and the key they came from; exactly one of echo_time_s / echo_times_s."""
    key = exactly_one(spec, "echo_time_s", "echo_times_s", "one echo time (echo_time_s) or a series (echo_times_s)")
    if key == "echo_time_s":
        return (spec.echo_time_s,), key
    check_distinct(spec.echo_times_s, "echo_times_s")
    return spec.echo_times_s, "echo_times_s"


def compile_echo(spec: EchoSequence, ctx: CompileContext) -> Timeline:
    """Compile a Hahn echo spec (one echo time or a series); pure and deterministic."""
    fs = ctx.sample_rate_hz
    steps = phase_cycle_steps(spec.phase_cycle)
    check_shots_fill_cycle(spec.shots, steps)
    times, key = echo_times(spec)
    n_ref = pulse_samples(spec.refocus, "refocus", ctx)
    n_exc = pulse_samples(spec.excite, "excite", ctx) if spec.excite is not None else 0
    dead_n = samples_of(spec.receive.dead_time_s, fs)
    half_window_n = samples_of(spec.echo_window_s / 2, fs)
    acq_n = samples_of(spec.receive.acquire_s, fs)
    shots = []
    for index, (point, rep) in enumerate(shot_order(len(times), spec.shots, spec.order)):
        te = times[point]
        where = key if len(times) == 1 else f"{key}[{point}]"
        step = steps[rep % len(steps)]
        b = SegmentBuilder(fs, spec.polarise.duration_s, spec.polarise.current_a, spec.switch_off)
        excite_phase = 0.0
        if spec.excite is not None:
            start = b.ramp_end_sample + samples_of(spec.excite_delay_s, fs)
            excite_phase = math.radians(spec.excite.phase_deg) + step.excite_rad
            b.pulse(start, n_exc, pulse_frequency_hz(spec.excite, "excite", ctx), excite_phase, spec.excite.amplitude_v)
            c0, excite_end = start + n_exc / 2, start + n_exc
        else:
            c0 = excite_end = b.ramp_end_sample
        ref_start = int(round(c0 + te * fs / 2 - n_ref / 2))
        if ref_start < excite_end:
            raise SpecError(where, f"echo time {te:g} s is shorter than the pulses: the refocusing pulse would start "
                                   f"before the excitation ends; allowed: at least {(n_exc + n_ref) / fs:.4g} s")
        echo = int(round(c0 + te * fs))
        acq_start = ref_start + n_ref + dead_n
        if acq_start > echo - half_window_n:
            shortest = (n_ref + 2 * dead_n + 2 * half_window_n) / fs
            raise SpecError(where, f"echo time {te:g} s is shorter than the refocusing pulse ({n_ref / fs:.4g} s) plus "
                                   f"twice the dead time ({spec.receive.dead_time_s:g} s) plus the echo window "
                                   f"({spec.echo_window_s:g} s); allowed: at least {shortest:.4g} s")
        if acq_start + acq_n < echo + half_window_n:
            raise SpecError("receive.acquire_s", f"{spec.receive.acquire_s:g} s ends before the echo at TE = {te:g} s "
                                                 f"(and half its window) is over; allowed: at least "
                                                 f"{(echo + half_window_n - acq_start) / fs:.4g} s")
        b.pulse(ref_start, n_ref, pulse_frequency_hz(spec.refocus, "refocus", ctx),
                excite_phase + math.radians(spec.refocus.phase_deg) + step.refocus_rad, spec.refocus.amplitude_v)
        b.acquire(acq_start, acq_n, step.receiver_rad)
        b.echo_centre(echo, 0, c0)
        shots.append(b.finish(index, acq_start + acq_n, spec.recovery_s, series_index=point,
                              series_value=(echo - c0) / fs, cycle_step=rep % len(steps)))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs, shots=tuple(shots),
                    notes=frequency_note(ctx, [spec.excite, spec.refocus]), larmor_hz=ctx.larmor_hz,
                    series_name="echo time" if len(times) > 1 else "", series_unit="s")
