"""Dispatch a sequence spec to its compiler."""

from __future__ import annotations

from typing import Any

from controller.config.schema import FidSequence
from controller.sequences.fid import compile_fid
from controller.sequences.timeline import Timeline


def compile_sequence(spec: Any, sample_rate_hz: float, larmor_hz: float | None = None) -> Timeline:
    """Compile any known sequence spec into a Timeline (pure, deterministic)."""
    if isinstance(spec, FidSequence):
        return compile_fid(spec, sample_rate_hz, larmor_hz)
    raise TypeError(f"no compiler for {type(spec).__name__}")
