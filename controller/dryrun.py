"""Run a timeline on a simulated rig and keep the records in memory (no store).

For rehearsals, tests and benchmarks: the same Engine and drivers as a real run, on a
virtual clock starting at start_epoch_s, so a run is reproducible from the rig's seed.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from controller.clock import VirtualClock
from controller.config.loader import LoadedRig
from controller.engine import Engine, RunOutcome
from controller.records import Record, ShotAcquired
from controller.rig import Rig, build_rig
from controller.sequences.timeline import Timeline


@dataclass
class DryRun:
    outcome: RunOutcome
    shots: list[ShotAcquired]
    records: list[Record] = field(default_factory=list)
    rig: Rig | None = None


def dry_run(timeline: Timeline, loaded: LoadedRig, start_epoch_s: float = 1_750_000_000.0) -> DryRun:
    """Run timeline on the simulated rig described by loaded; return the outcome and every record."""
    if loaded.config.simulator is None:
        raise ValueError("dry_run needs a simulated rig")
    clock = VirtualClock(start_epoch_s=start_epoch_s)
    rig = build_rig(loaded, clock)
    records: list[Record] = []
    engine = Engine(rig, clock)
    engine.critical_sinks.append(records.append)
    outcome = engine.run(timeline, {"dry_run": True})
    shots = [r for r in records if isinstance(r, ShotAcquired)]
    return DryRun(outcome=outcome, shots=shots, records=records, rig=rig)
