"""Dispatch a sequence spec to its compiler."""

from __future__ import annotations

from typing import Any, Callable

from controller.calibration import PulseCalibration
from controller.config.schema import FidSequence
from controller.config.sequences import (
    CpmgSequence, EchoSequence, NoiseSequence, NutationSequence, T1EarthSequence, T1PolariseSequence,
)
from controller.sequences.building import CompileContext
from controller.sequences.cpmg import compile_cpmg
from controller.sequences.echo import compile_echo
from controller.sequences.fid import compile_fid
from controller.sequences.noise import compile_noise
from controller.sequences.nutation import compile_nutation
from controller.sequences.t1 import compile_t1_earth, compile_t1_polarise
from controller.sequences.timeline import Timeline

COMPILERS: dict[type, Callable[[Any, CompileContext], Timeline]] = {
    FidSequence: compile_fid, EchoSequence: compile_echo, CpmgSequence: compile_cpmg,
    T1PolariseSequence: compile_t1_polarise, T1EarthSequence: compile_t1_earth,
    NutationSequence: compile_nutation, NoiseSequence: compile_noise,
}


def compile_sequence(spec: Any, sample_rate_hz: float, larmor_hz: float | None = None, *,
                     larmor_source: str = "predicted", calibration: PulseCalibration | None = None) -> Timeline:
    """Compile any known sequence spec into a Timeline (pure, deterministic).

    larmor_hz is used for pulses that give no frequency_hz; larmor_source says where it came
    from (for the timeline's notes); calibration turns flip_deg into pulse lengths.
    Raises SpecError (a ValueError naming the spec key) for a spec that cannot be played.
    """
    compiler = COMPILERS.get(type(spec))
    if compiler is None:
        raise TypeError(f"no compiler for {type(spec).__name__}")
    return compiler(spec, CompileContext(sample_rate_hz, larmor_hz, larmor_source, calibration))
