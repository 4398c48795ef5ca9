"""Builds small stores from the simulated rig for the store, export and report tests."""

from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path

from controller.analysis.sources import analyse_records
from controller.cli.common import config_snapshot
from controller.clock import VirtualClock
from controller.config.loader import load_rig, load_sequence
from controller.engine import Engine
from controller.rig import build_rig
from controller.sequences.compile import compile_sequence
from controller.store import Store

from tests.conftest import DEMO_RIG, EPOCH_NOON_UTC, FID_SUDDEN


def simulated_run(store: Store, shots: int, start_epoch_s: float, analyse: bool = True, loaded=None) -> str:
    """Run the demo FID sequence on the simulated rig (or `loaded`) into `store`; return the run id."""
    loaded = loaded or load_rig(DEMO_RIG)
    clock = VirtualClock(start_epoch_s=start_epoch_s)
    rig = build_rig(loaded, clock)
    spec = dataclasses.replace(load_sequence(FID_SUDDEN), shots=shots)
    timeline = compile_sequence(spec, loaded.config.transceiver.sample_rate_hz)
    engine = Engine(rig, clock)
    engine.critical_sinks.append(store.write)
    outcome = engine.run(timeline, config_snapshot(loaded, spec, str(FID_SUDDEN)))
    if analyse:
        result = analyse_records(list(store.shots(outcome.run_id)))
        store.add_result(outcome.run_id, "fid", result.as_dict(), clock.now())
    return outcome.run_id


def two_run_store(path: Path) -> tuple[str, str]:
    """Run A: 4 shots from EPOCH_NOON_UTC; run B: 3 shots from 10 minutes later (a gap between)."""
    with Store(path) as store:
        a = simulated_run(store, 4, EPOCH_NOON_UTC)
        b = simulated_run(store, 3, EPOCH_NOON_UTC + 600.0)
    return a, b


def copy_store(template: Path, dest: Path) -> Path:
    shutil.copyfile(template, dest)
    return dest
