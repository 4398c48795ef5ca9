"""The TUI's link to the rig: a queue of runs executed by the engine on a worker thread.

The UI thread only calls `enqueue`, `remove`, `go`, `stop`, `emergency_stop`, `acknowledge`
and `close`; none of them touches a driver or waits for one.  The engine runs on the
`runner` thread and the live analysis on the `analysis` thread; both report through
`notify(event)`, which must be thread-safe and must not block (the app passes
`App.post_message`).  Events are the engine's records plus the small dataclasses below.

Stopping: `stop` asks the engine to stop (the run ends at its next check, its `finally`
makes the rig safe) and pauses the queue; `emergency_stop` does the same, empties the
queue, and, when no run is active, makes the rig safe on a helper thread.
"""

from __future__ import annotations

import logging
import queue
import threading
import uuid
from dataclasses import dataclass
from typing import Any, Callable

from controller.checks import check_all
from controller.clock import Clock
from controller.config.loader import LoadedRig
from controller.engine import Engine
from controller.errors import PrecessError
from controller.records import EXIT_COMPLETED, InterlockTripped, Record, RunFinished, RunStarted, ShotAcquired
from controller.rig import Rig
from controller.sequences.timeline import Timeline
from controller.store import Store
from controller.runner import PreparedRun, finish_run, prepare_spec, run_snapshot
from controller.tui.adapter import LiveStack
from controller.tui.latch import STATE_TRIPPED, RecordLatch, TripLatch

log = logging.getLogger(__name__)
Notify = Callable[[Any], None]
EMERGENCY_REASON = "EMERGENCY STOP by the operator"


@dataclass(frozen=True)
class QueuedRun:
    """A checked sequence waiting to run."""

    label: str
    spec: Any
    source: str  # the sequence file it came from (its folder holds any pulse calibration)
    timeline: Timeline  # as checked on the plan screen; prepared again when it runs
    config_snapshot: dict[str, Any]


@dataclass(frozen=True)
class QueueChanged:
    labels: tuple[str, ...]
    running: bool


@dataclass(frozen=True)
class Notice:
    """A line for the operator (a refusal, a stop request, a store problem)."""

    text: str
    alarm: bool = False


@dataclass(frozen=True)
class RunBegins:
    """Sent just before the engine starts a queued run."""

    label: str
    planned_duration_s: float


@dataclass(frozen=True)
class RunContext:
    """What the live analysis needs to know about a run that has started."""

    run_id: str
    timeline: Timeline
    spec: Any


@dataclass(frozen=True)
class LatchChanged:
    state: str
    reason: str


EngineFactory = Callable[[Store], Engine]


class Session:
    """Owns the engine, its worker threads and the run queue for one rig.

    engine_factory(store) builds the Engine of one run with the store as its critical sink
    (the app passes a supervised one; the default is a plain Engine).
    """

    def __init__(self, loaded: LoadedRig, rig: Rig, clock: Clock, db_path: str, notify: Notify,
                 latch: TripLatch | None = None, live_stack: LiveStack | None = None,
                 engine_factory: EngineFactory | None = None, new_run_id: Callable[[], str] | None = None) -> None:
        self.loaded = loaded
        self.rig = rig
        self.clock = clock
        self.db_path = db_path
        self.notify = notify
        self.latch: TripLatch = latch or RecordLatch(loaded.config.name)
        self.engine_factory = engine_factory or self._plain_engine
        self.engine: Engine | None = None  # the engine of the active run
        self.new_run_id = new_run_id or (lambda: uuid.uuid4().hex[:12])
        self.live_stack = live_stack or LiveStack()
        self._lock = threading.Lock()
        self._queue: list[QueuedRun] = []
        self._halt = threading.Event()
        self._runner: threading.Thread | None = None
        self._shots: queue.Queue = queue.Queue()
        self._analysis = threading.Thread(target=self._analyse_loop, name="precess-analysis", daemon=True)
        self._analysis.start()
        self._closed = False
        self._started_run_id = ""
        self._current: PreparedRun | None = None

    def _plain_engine(self, store: Store) -> Engine:
        engine = Engine(self.rig, self.clock)
        engine.critical_sinks.append(store.write)
        return engine

    # ---- queries (any thread) ----------------------------------------------------------
    @property
    def running(self) -> bool:
        runner = self._runner
        return runner is not None and runner.is_alive()

    def queued(self) -> tuple[str, ...]:
        with self._lock:
            return tuple(item.label for item in self._queue)

    # ---- commands from the UI (never block, never touch a driver) -----------------------
    def enqueue(self, item: QueuedRun) -> None:
        with self._lock:
            self._queue.append(item)
        self._queue_changed()

    def remove(self, index: int) -> None:
        with self._lock:
            if 0 <= index < len(self._queue):
                del self._queue[index]
        self._queue_changed()

    def go(self) -> str | None:
        """Start working through the queue; returns why it cannot, or None."""
        if self._closed:
            return "the session is closed"
        if self.latch.state == STATE_TRIPPED:
            return f"supervisor tripped ({self.latch.trip_reason}); acknowledge it first"
        if self.running:
            return "a run is already active"
        with self._lock:
            if not self._queue:
                return "the queue is empty; add a sequence from the plan screen"
        self._halt.clear()
        self._runner = threading.Thread(target=self._run_queue, name="precess-runner", daemon=True)
        self._runner.start()
        self._queue_changed()
        return None

    def stop(self, reason: str = "stopped by the operator") -> None:
        """Stop the active run (rig made safe by the engine) and pause the queue."""
        self._halt.set()
        engine = self.engine
        if engine is not None:
            engine.stop(reason)
            self.notify(Notice(f"stop requested: {reason}"))

    def emergency_stop(self) -> None:
        """Stop at once and empty the queue; the rig is made safe on a helper thread.

        With an active run the engine is told to stop (its `finally` makes the rig safe);
        an engine that offers `emergency_stop` also makes the rig safe at once from the helper
        thread, even while its own thread waits on a driver.  With no run, the helper calls
        `Rig.make_safe()` (idempotent).
        """
        self._halt.set()
        with self._lock:
            self._queue.clear()
        engine = self.engine
        if engine is not None:
            engine.stop(EMERGENCY_REASON)
        threading.Thread(target=self._make_safe_now, args=(engine,), name="precess-make-safe", daemon=True).start()
        self.notify(Notice("EMERGENCY STOP: run stopped, queue emptied, rig being made safe", alarm=True))
        self._queue_changed()

    def acknowledge(self, confirmation: str, note: str) -> None:
        """Clear a trip (raises PrecessError when the confirmation does not match)."""
        self.latch.acknowledge(confirmation, note)
        self.notify(LatchChanged(self.latch.state, self.latch.trip_reason))
        self.notify(Notice(f"trip acknowledged: {note}"))

    def close(self, timeout_s: float = 30.0) -> bool:
        """Stop everything and wait for the threads; True when the runner has finished."""
        self._closed = True
        self._halt.set()
        runner = self._runner
        if runner is not None and runner.is_alive():
            if self.engine is not None:
                self.engine.stop("the terminal UI was closed")
            runner.join(timeout_s)
        self._shots.put(None)
        self._analysis.join(5.0)
        return runner is None or not runner.is_alive()

    # ---- worker threads -----------------------------------------------------------------
    def _make_safe_now(self, engine: Engine | None) -> None:
        if engine is not None and hasattr(engine, "emergency_stop"):
            failures = engine.emergency_stop(EMERGENCY_REASON)
        elif engine is not None:
            return  # the engine's finally makes the rig safe and reports it in RunFinished
        else:
            failures = self.rig.make_safe()
        text = "rig made safe" if not failures else "could not make safe: " + "; ".join(failures)
        self.notify(Notice(text, alarm=bool(failures)))

    def _queue_changed(self) -> None:
        self.notify(QueueChanged(self.queued(), self.running))

    def _run_queue(self) -> None:
        try:
            while not self._halt.is_set():
                with self._lock:
                    if not self._queue:
                        break
                    item = self._queue.pop(0)
                self._queue_changed()
                if not self._run_one(item):
                    break
        finally:
            self.notify(QueueChanged(self.queued(), False))

    def _run_one(self, item: QueuedRun) -> bool:
        """Run one queued item as `precess run` does; True when it completed and the queue may go on."""
        if self.latch.state == STATE_TRIPPED:
            self.notify(Notice(f"refused {item.label}: supervisor tripped ({self.latch.trip_reason})", alarm=True))
            return False
        try:
            with Store(self.db_path) as store:
                prepared = prepare_spec(item.spec, item.source, self.loaded, store=store)  # "last" frequency
                violations = check_all(prepared.timeline, self.loaded.config)
                if violations:
                    self.notify(Notice(f"refused {item.label}: {violations[0]}", alarm=True))
                    return False
                outcome = self._engine_run(item, prepared, store)
                if outcome is None:
                    return False
                self._finish(prepared, store, outcome.run_id)
        except Exception as exc:  # noqa: BLE001 - the store could not open or close; reported
            self.notify(Notice(f"run of {item.label} ended in error: {exc}", alarm=True))
            return False
        return outcome.exit_status == EXIT_COMPLETED

    def _engine_run(self, item: QueuedRun, prepared: PreparedRun, store: Store) -> Any:
        """engine.run on this thread; None (with a notice) when the supervisor refused to start."""
        engine = self.engine_factory(store)
        engine.best_effort_sinks.append(self._on_record)
        self.notify(RunBegins(item.label, prepared.timeline.duration_s))
        self._current = prepared
        self.engine = engine
        run_id = self.new_run_id()
        try:
            outcome = engine.run(prepared.timeline, run_snapshot(item.config_snapshot, prepared), run_id=run_id)
        except PrecessError as exc:  # the supervisor refused before anything was energised
            self.notify(Notice(f"refused {item.label}: {exc}", alarm=True))
            self.notify(LatchChanged(self.latch.state, self.latch.trip_reason))
            return None
        finally:
            self.engine = None
        if self._started_run_id != run_id:  # no RunStarted reached us: say why
            self.notify(Notice(f"{item.label} did not start: {outcome.reason}", alarm=True))
        return outcome

    def _finish(self, prepared: PreparedRun, store: Store, run_id: str) -> None:
        """Analyse the stored shots by kind and keep the result, as `precess run` does."""
        try:
            result = finish_run(prepared, self.loaded, store, run_id, self.clock.now())
        except PrecessError as exc:
            self.notify(Notice(str(exc), alarm=True))
            return
        if result.get("headline"):
            self.notify(Notice(f"run {run_id}: {result['headline']['text']}"))

    def _on_record(self, record: Record) -> None:
        """Best-effort sink on the engine's thread: latch, analysis hand-off, UI notification."""
        self.latch.observe(record)
        if isinstance(record, RunStarted):
            self._started_run_id = record.run_id
            self._shots.put(RunContext(record.run_id, self._current.timeline, self._current.spec))
        if isinstance(record, RunStarted) and self._halt.is_set() and self.engine is not None:
            self.engine.stop("stop requested before the run began")
        if isinstance(record, ShotAcquired):
            self._shots.put(record)
        self.notify(record)
        if isinstance(record, (InterlockTripped, RunFinished)):
            self.notify(LatchChanged(self.latch.state, self.latch.trip_reason))

    def _analyse_loop(self) -> None:
        while True:
            record = self._shots.get()
            if record is None:
                return
            if isinstance(record, RunContext):
                self.live_stack.reset(record.run_id, record.timeline, record.spec)
                continue
            try:
                behind = self._shots.qsize() > 2  # far behind: stack this shot, draw a later one
                views = self.live_stack.add(record, views=not behind)
                if views is not None:
                    self.notify(views)
            except Exception:  # noqa: BLE001 - live analysis is best effort
                log.exception("live analysis failed on shot %s", record.shot_index)
