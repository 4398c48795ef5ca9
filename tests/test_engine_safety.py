"""The engine always leaves the rig safe and says why it stopped.

Common practice, no source: a run controller's `finally` makes every driver safe (current off,
transmitter silent) on completion, stop, driver exception and store failure.
"""

from __future__ import annotations

import dataclasses
import os
import signal
import sqlite3
import subprocess
import sys
import threading
import time

import pytest

from controller.clock import VirtualClock
from controller.config.loader import load_rig, load_sequence
from controller.engine import Engine
from controller.records import RunFinished, ShotAcquired, StatusSample
from controller.rig import build_rig
from controller.sequences.compile import compile_sequence
from controller.store import Store

from tests.conftest import DEMO_RIG, EPOCH_NOON_UTC, FID_SUDDEN


def _setup(shots: int = 3):
    clock = VirtualClock(start_epoch_s=EPOCH_NOON_UTC)
    rig = build_rig(load_rig(DEMO_RIG), clock)
    spec = dataclasses.replace(load_sequence(FID_SUDDEN), shots=shots)
    timeline = compile_sequence(spec, 48000.0)
    return clock, rig, timeline


def _coil_is_off(rig) -> bool:
    inst = rig.instrument
    return (not inst.output_on) and rig.supply.read_current() == 0.0 and inst.path == "idle"


def test_completed_run_ends_safe():
    clock, rig, timeline = _setup(2)
    records: list = []
    engine = Engine(rig, clock)
    engine.critical_sinks.append(records.append)
    outcome = engine.run(timeline, {})
    assert outcome.exit_status == "completed"
    assert isinstance(records[-1], RunFinished) and records[-1].exit_status == "completed"
    assert _coil_is_off(rig)


def test_driver_exception_mid_run_leaves_coil_off():
    clock, rig, timeline = _setup(3)
    records: list = []

    def inject(record):
        records.append(record)
        # once the second shot is polarising (current on), the transceiver stream fails
        if isinstance(record, ShotAcquired) and record.shot_index == 0:
            rig.instrument.faults.transceiver_error = True

    engine = Engine(rig, clock)
    engine.critical_sinks.append(inject)
    outcome = engine.run(timeline, {})
    assert outcome.exit_status == "failed"
    assert "injected stream failure" in outcome.reason
    assert outcome.shots_completed == 1
    assert _coil_is_off(rig)
    assert records[-1].exit_status == "failed"


def test_stop_request_while_polarising_leaves_coil_off():
    clock, rig, timeline = _setup(3)
    engine = Engine(rig, clock)
    seen_current = []

    def stop_when_energised(record):
        if isinstance(record, StatusSample) and record.readings["current_a"] > 1.0:
            seen_current.append(record.readings["current_a"])
            engine.stop("operator pressed stop")

    engine.best_effort_sinks.append(stop_when_energised)
    outcome = engine.run(timeline, {})
    assert seen_current, "the coil was never energised"
    assert outcome.exit_status == "stopped" and outcome.reason == "operator pressed stop"
    assert _coil_is_off(rig)


def test_store_failure_stops_run_and_leaves_coil_off(tmp_path):
    clock, rig, timeline = _setup(3)
    store = Store(tmp_path / "s.sqlite")
    engine = Engine(rig, clock)

    def failing_store(record):
        if isinstance(record, ShotAcquired) and record.shot_index == 1:
            store.db.close()  # the disk went away under the store
        store.write(record)

    engine.critical_sinks.append(failing_store)
    outcome = engine.run(timeline, {})
    assert outcome.exit_status == "failed" and "store failed" in outcome.reason
    assert _coil_is_off(rig)
    with Store(tmp_path / "s.sqlite") as again:
        assert [s.shot_index for s in again.shots(outcome.run_id)] == [0]


def test_keyboard_interrupt_leaves_coil_off():
    clock, rig, timeline = _setup(2)
    engine = Engine(rig, clock)

    def interrupt(record):
        if isinstance(record, StatusSample) and record.readings["current_a"] > 1.0:
            raise KeyboardInterrupt

    engine.critical_sinks.append(interrupt)
    with pytest.raises(KeyboardInterrupt):
        engine.run(timeline, {})
    assert _coil_is_off(rig)


def test_stop_from_another_thread():
    clock, rig, timeline = _setup(50)
    engine = Engine(rig, clock)
    done = []
    worker = threading.Thread(target=lambda: done.append(engine.run(timeline, {})))
    worker.start()
    time.sleep(0.3)
    engine.stop("emergency stop")
    worker.join(timeout=30)
    assert done and done[0].exit_status == "stopped"
    assert _coil_is_off(rig)


def test_sigkill_leaves_readable_store_with_committed_shots(tmp_path):
    # source: SQLite documentation, "Atomic Commit In SQLite" and WAL mode: committed transactions
    # survive a process crash; at most the shot in flight is lost
    db = tmp_path / "killed.sqlite"
    proc = subprocess.Popen([sys.executable, "-m", "controller.cli.main", "run", str(FID_SUDDEN), "--rig",
                             str(DEMO_RIG), "--shots", "200", "--db", str(db)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        deadline = time.time() + 60
        count = 0
        while time.time() < deadline and count < 3:
            time.sleep(0.2)
            if db.exists():
                try:
                    with sqlite3.connect(db, timeout=1) as con:
                        count = con.execute("SELECT COUNT(*) FROM shots").fetchone()[0]
                except sqlite3.Error:
                    pass
        assert count >= 3, "the run never stored three shots"
    finally:
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
    with Store(db) as store:
        assert store.integrity_ok()
        (run,) = store.runs()
        assert run["exit_status"] is None  # never finished: killed
        shots = list(store.shots(run["run_id"]))  # checksums verified while reading
        assert len(shots) >= count
        assert [s.shot_index for s in shots] == list(range(len(shots)))
