"""The TUI's session (engine on a worker thread, run queue, latch) and its state model, without a screen."""

from __future__ import annotations

import dataclasses
import threading
import time

import pytest

from controller.clock import VirtualClock
from controller.config.loader import load_rig, load_sequence
from controller.errors import PrecessError
from controller.records import InterlockTripped, RunFinished, RunStarted, StatusSample
from controller.rig import build_rig
from controller.sequences.compile import compile_sequence
from controller.tui.latch import STATE_CLEAR, STATE_TRIPPED, RecordLatch
from controller.tui.session import Notice, QueuedRun, Session

from tests.conftest import DEMO_RIG, EPOCH_NOON_UTC, FID_SUDDEN
from tests.tui_support import coil_is_off

pytestmark = pytest.mark.timeout(60)


def _session(tmp_path, pace=0.0):
    loaded = load_rig(DEMO_RIG)
    clock = VirtualClock(start_epoch_s=EPOCH_NOON_UTC, pace=pace)
    rig = build_rig(loaded, clock)
    events: list = []
    lock = threading.Lock()

    def notify(e):
        with lock:
            events.append(e)

    return loaded, rig, Session(loaded, rig, clock, str(tmp_path / "s.sqlite"), notify), events


def _item(loaded, shots=2, current_a=2.0):
    spec = load_sequence(FID_SUDDEN)
    spec = dataclasses.replace(spec, shots=shots, polarise=dataclasses.replace(spec.polarise, current_a=current_a))
    timeline = compile_sequence(spec, loaded.config.transceiver.sample_rate_hz)
    return QueuedRun(f"{spec.name} ×{shots}", spec, str(FID_SUDDEN), timeline, {"sequence": dataclasses.asdict(spec)})


def _wait(predicate, timeout_s=30.0):
    deadline = time.monotonic() + timeout_s
    while not predicate():
        assert time.monotonic() < deadline, "timed out"
        time.sleep(0.01)


def test_queue_runs_in_order_and_results_are_stored(tmp_path):
    loaded, rig, session, events = _session(tmp_path)
    assert session.go() == "the queue is empty; add a sequence from the plan screen"
    session.enqueue(_item(loaded, shots=2))
    session.enqueue(_item(loaded, shots=1))
    assert session.go() is None
    _wait(lambda: not session.running)
    finished = [e for e in events if isinstance(e, RunFinished)]
    assert [f.exit_status for f in finished] == ["completed", "completed"]
    assert [f.shots_completed for f in finished] == [2, 1]
    assert session.close()
    from controller.store import Store
    with Store(tmp_path / "s.sqlite") as store:
        runs = store.runs()
        assert len(runs) == 2 and all(store.results(r["run_id"]) for r in runs)
    assert coil_is_off(rig)


def test_a_run_over_the_limits_is_refused_before_anything_is_energised(tmp_path):
    loaded, rig, session, events = _session(tmp_path)
    energised = []
    original = rig.supply.set_current
    rig.supply.set_current = lambda a: (energised.append(a), original(a))
    session.enqueue(_item(loaded, current_a=5.0))  # above max_current_a = 3 A
    session.go()
    _wait(lambda: not session.running)
    session.close()
    notices = [e.text for e in events if isinstance(e, Notice)]
    assert any("refused" in n and "polarising current" in n for n in notices)
    assert not energised and not any(isinstance(e, RunStarted) for e in events)


def test_trip_latches_until_the_rig_name_is_typed(tmp_path):
    loaded, rig, session, events = _session(tmp_path)
    latch = session.latch
    trip = InterlockTripped("r", EPOCH_NOON_UTC, "over-current", "3.4 A > 3.0 A", {"current_a": 3.4})
    latch.observe(trip)
    latch.observe(RunFinished("r", EPOCH_NOON_UTC, "completed", "later run", 1))
    assert latch.state == STATE_TRIPPED and "over-current" in latch.trip_reason
    session.enqueue(_item(loaded))
    assert "supervisor tripped" in session.go()
    with pytest.raises(PrecessError):
        session.acknowledge("yes", "note")
    assert latch.state == STATE_TRIPPED
    session.acknowledge(loaded.config.name, "cable replaced")
    assert latch.state == STATE_CLEAR and latch.acknowledged == [("over-current: 3.4 A > 3.0 A", "cable replaced")]
    session.close()


def test_interlock_exit_status_latches_too():
    latch = RecordLatch("rig")
    latch.observe(RunFinished("r", 0.0, "interlock", "coil temperature 72 C > 70 C", 0))
    assert latch.state == STATE_TRIPPED and latch.trip_reason == "coil temperature 72 C > 70 C"


def test_close_stops_an_active_run_and_leaves_the_coil_off(tmp_path):
    loaded, rig, session, events = _session(tmp_path, pace=0.2)
    session.enqueue(_item(loaded, shots=20))
    session.go()
    _wait(lambda: any(isinstance(e, StatusSample) and e.readings["current_a"] > 1 for e in list(events)))
    assert session.close(timeout_s=20)
    finished = [e for e in events if isinstance(e, RunFinished)]
    assert finished and finished[-1].exit_status == "stopped"
    assert coil_is_off(rig)


def test_a_cpmg_run_shows_its_kinds_headline_live_and_stores_the_same_analysis(tmp_path):
    from pathlib import Path

    from controller.runner import analysis_context
    from controller.store import Store
    from controller.tui.adapter import LiveStack, LiveViews
    from controller.tui.plan import check_rows, find_sequences, form_of, queued_run

    from tests.conftest import CONFIGS

    loaded, rig, session, events = _session(tmp_path)
    session.live_stack = LiveStack(50.0, 2054.3, context=analysis_context(loaded))
    (entry,) = [s for s in find_sequences(Path(CONFIGS / "sequences")) if s.label == "cpmg-t2"]
    check = check_rows(type(entry.spec), form_of(entry), loaded, entry.path)
    session.enqueue(queued_run(check, loaded, entry.path))
    session.go()
    _wait(lambda: not session.running)
    session.close()
    views = [e for e in events if isinstance(e, LiveViews)]
    assert views[-1].kind == "cpmg" and views[-1].headline["quantity"] == "T2"
    with Store(tmp_path / "s.sqlite") as store:
        (run,) = store.runs()
        (result,) = store.results(run["run_id"])
    assert result["kind"] == "cpmg" and result["headline"]["text"] == views[-1].headline["text"]
