"""Records the engine emits, in order, for one run.

RunStarted -> (StatusSample | ShotAcquired | InterlockTripped)* -> RunFinished.
Every record is frozen; arrays inside are read-only.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

EXIT_COMPLETED = "completed"
EXIT_STOPPED = "stopped"
EXIT_INTERLOCK = "interlock"
EXIT_FAILED = "failed"
EXIT_STATUSES = (EXIT_COMPLETED, EXIT_STOPPED, EXIT_INTERLOCK, EXIT_FAILED)


@dataclass(frozen=True)
class RunStarted:
    run_id: str
    started_at_s: float
    sequence_name: str
    sequence_kind: str
    shots_planned: int
    sample_rate_hz: float
    config: dict[str, Any]
    software_version: str
    simulated: bool


@dataclass(frozen=True)
class ShotAcquired:
    """One shot's raw samples (all channels) and the timing actually achieved."""

    run_id: str
    shot_index: int
    started_at_s: float
    sample_rate_hz: float
    channel_names: tuple[str, ...]
    samples: np.ndarray  # (n_channels, n_samples) volts at the converter
    switch_off_sample: int
    acquire_start_sample: int
    acquire_samples: int
    dead_time_s: float
    latency_samples: int
    bad: bool = False
    notes: tuple[str, ...] = field(default=())


@dataclass(frozen=True)
class StatusSample:
    run_id: str
    at_s: float
    readings: dict[str, float]


@dataclass(frozen=True)
class InterlockTripped:
    run_id: str
    at_s: float
    check: str
    reason: str
    values: dict[str, float]


@dataclass(frozen=True)
class ShotAnalysed:
    """Live analysis of the running stack after a shot (best effort)."""

    run_id: str
    shot_index: int
    result: dict[str, Any]


@dataclass(frozen=True)
class RunFinished:
    run_id: str
    finished_at_s: float
    exit_status: str
    reason: str
    shots_completed: int
    safe_state_failures: tuple[str, ...] = field(default=())


Record = RunStarted | ShotAcquired | StatusSample | InterlockTripped | ShotAnalysed | RunFinished
