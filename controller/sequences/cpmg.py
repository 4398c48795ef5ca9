"""Compile a `cpmg` spec into a Timeline.

    90(phi) - tau - [180(phi + 90) - tau - echo - tau]^n         variant "cpmg"
    90(phi) - tau - [180(phi)      - tau - echo - tau]^n         variant "cp"

with tau = echo_spacing / 2 measured between pulse centres.  Shifting the refocusing pulses
by 90 deg puts them along the magnetisation, so a pulse-angle error does not accumulate from
echo to echo (Meiboom & Gill, Rev. Sci. Instrum. 29:688 (1958)); in phase (Carr & Purcell,
Phys. Rev. 94:630 (1954)) it does.

The receiver opens a dead time after each refocusing pulse and closes at the next one; each
window must hold the echo and half the echo window on either side, so

    tau >= t_180 / 2 + t_dead + w / 2     and     tau >= (t_90 + t_180) / 2.
"""

from __future__ import annotations

import math

from controller.config.sequences import CpmgSequence
from controller.sequences.building import (
    CompileContext, SegmentBuilder, SpecError, check_shots_fill_cycle, frequency_note, phase_cycle_steps,
    pulse_frequency_hz, pulse_samples, samples_of,
)
from controller.sequences.timeline import Timeline

MG_SHIFT_RAD = math.pi / 2


def compile_cpmg(spec: CpmgSequence, ctx: CompileContext) -> Timeline:
    """Compile a CPMG (or CP) echo train; pure and deterministic."""
    fs = ctx.sample_rate_hz
    steps = phase_cycle_steps(spec.phase_cycle)
    check_shots_fill_cycle(spec.shots, steps)
    n_exc = pulse_samples(spec.excite, "excite", ctx)
    n_ref = pulse_samples(spec.refocus, "refocus", ctx)
    tau = spec.echo_spacing_s * fs / 2
    dead_n = samples_of(spec.receive.dead_time_s, fs)
    half_window_n = samples_of(spec.echo_window_s / 2, fs)
    if tau < (n_exc + n_ref) / 2:
        raise SpecError("echo_spacing_s", f"{spec.echo_spacing_s:g} s is shorter than the pulses; allowed: at least "
                                          f"{(n_exc + n_ref) / fs:.4g} s")
    if tau - n_ref / 2 - dead_n < half_window_n:
        shortest = (n_ref + 2 * dead_n + 2 * half_window_n) / fs
        raise SpecError("echo_spacing_s", f"{spec.echo_spacing_s:g} s is shorter than the refocusing pulse "
                                          f"({n_ref / fs:.4g} s) plus twice the dead time ({spec.receive.dead_time_s:g} s) "
                                          f"plus the echo window ({spec.echo_window_s:g} s); allowed: at least {shortest:.4g} s")
    f_exc = pulse_frequency_hz(spec.excite, "excite", ctx)
    f_ref = pulse_frequency_hz(spec.refocus, "refocus", ctx)
    shift = MG_SHIFT_RAD if spec.variant == "cpmg" else 0.0
    shots = []
    for i in range(spec.shots):
        step = steps[i % len(steps)]
        b = SegmentBuilder(fs, spec.polarise.duration_s, spec.polarise.current_a, spec.switch_off)
        start = b.ramp_end_sample + samples_of(spec.excite_delay_s, fs)
        excite_phase = math.radians(spec.excite.phase_deg) + step.excite_rad
        b.pulse(start, n_exc, f_exc, excite_phase, spec.excite.amplitude_v)
        c0 = start + n_exc / 2
        refocus_phase = excite_phase + shift + math.radians(spec.refocus.phase_deg) + step.refocus_rad
        end = 0
        for k in range(spec.echoes):
            ref_start = int(round(c0 + tau * (2 * k + 1) - n_ref / 2))
            b.pulse(ref_start, n_ref, f_ref, refocus_phase, spec.refocus.amplitude_v)
            echo = int(round(c0 + tau * (2 * k + 2)))
            acq_start = ref_start + n_ref + dead_n
            end = int(round(c0 + tau * (2 * k + 3) - n_ref / 2)) if k < spec.echoes - 1 else 2 * echo - acq_start
            b.acquire(acq_start, end - acq_start, step.receiver_rad)
            b.echo_centre(echo, k, c0)
        shots.append(b.finish(i, end, spec.recovery_s, cycle_step=i % len(steps)))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs, shots=tuple(shots),
                    notes=frequency_note(ctx, [spec.excite, spec.refocus]), larmor_hz=ctx.larmor_hz)
