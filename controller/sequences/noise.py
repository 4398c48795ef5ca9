"""Compile a `noise` spec: receive only, no current and no pulse, shot after shot."""

from __future__ import annotations

from controller.config.sequences import NoiseSequence
from controller.sequences.building import CompileContext, SegmentBuilder, SpecError, samples_of
from controller.sequences.timeline import Timeline


def noise_band_hz(spec: NoiseSequence, larmor_hz: float | None) -> tuple[float, float]:
    """The band for the noise density: band_hz, else the Larmor frequency +/- 100 Hz."""
    if spec.band_hz is not None:
        if len(spec.band_hz) != 2 or not spec.band_hz[0] < spec.band_hz[1]:
            raise SpecError("band_hz", f"{list(spec.band_hz)} is not [low, high] with low < high")
        return float(spec.band_hz[0]), float(spec.band_hz[1])
    if larmor_hz is None:
        raise SpecError("band_hz", "missing, and no Larmor frequency is known to centre the band on")
    return larmor_hz - 100.0, larmor_hz + 100.0


def compile_noise(spec: NoiseSequence, ctx: CompileContext) -> Timeline:
    """Receive-only records of acquire_s each; pure and deterministic."""
    fs = ctx.sample_rate_hz
    low, high = noise_band_hz(spec, ctx.larmor_hz)
    if high >= fs / 2:
        raise SpecError("band_hz", f"reaches {high:g} Hz; allowed: below half the sample rate ({fs / 2:g} Hz)")
    n = samples_of(spec.acquire_s, fs)
    shots = []
    for i in range(spec.shots):
        b = SegmentBuilder(fs)
        b.acquire(0, n, 0.0)
        shots.append(b.finish(i, n, spec.recovery_s))
    return Timeline(sequence_name=spec.name, sequence_kind=spec.kind, sample_rate_hz=fs, shots=tuple(shots),
                    notes=(f"noise density band {low:.1f}-{high:.1f} Hz",), larmor_hz=ctx.larmor_hz)
