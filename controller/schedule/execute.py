"""Run a schedule: wait for each slot, compile for the latest Larmor frequency, check, run, analyse, store.

One Engine serves every run.  The state a restarted scheduler needs (runs done, failures,
last slot, the frequency followed) lives in ScheduleState, and every run's configuration
snapshot in the store names the schedule, its file and the run's slot and occurrence, so
crash recovery can rebuild the state from the store.

The engine comes from the caller (the CLI gives the supervised engine with the rig's trip
latch).  The scheduler never clears an interlock: a latched trip, or a run that ends with an
interlock trip or is stopped by the operator, ends the schedule; a failed run ends it too
unless on_failure is "continue".  A slot at which the supervisor finds the coil still too warm
for the run is skipped (counted in `skipped`), and the next slot is tried.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass, field
from typing import Any, Callable

from controller.checks import check_all
from controller.clock import Clock
from controller.config.loader import LoadedRig
from controller.config.schedule import Schedule
from controller.engine import Engine
from controller.errors import PrecessError
from controller.records import EXIT_COMPLETED, EXIT_FAILED, EXIT_INTERLOCK, EXIT_STOPPED, Record
from controller.supervisor.latch import TripLatchedError
from controller.supervisor.machine import CoilTooWarmError
from controller.runner import PreparedRun, finish_run, prepare_run, with_larmor
from controller.schedule.plan import next_slot_s
from controller.store import Store

WAIT_STEP_S = 1.0


@dataclass
class ScheduleState:
    runs_done: int = 0
    failures: int = 0
    last_slot_s: float | None = None
    larmor_hz: float | None = None
    larmor_source: str = ""
    run_ids: list[str] = field(default_factory=list)
    skipped: int = 0


@dataclass(frozen=True)
class ScheduleOutcome:
    status: str  # completed / stopped / interlock / failed / refused
    reason: str
    state: ScheduleState


@dataclass(frozen=True)
class RunReport:
    """What the scheduler tells its observer after each run."""

    occurrence: int
    slot_s: float
    run_id: str
    exit_status: str
    reason: str
    result: dict[str, Any]
    larmor_hz: float | None
    next_slot_s: float | None


class ScheduleRunner:
    """Runs a schedule on one rig in the foreground; stop() is thread-safe."""

    def __init__(self, schedule: Schedule, loaded: LoadedRig, engine: Engine, store: Store, clock: Clock,
                 state: ScheduleState | None = None,
                 snapshot: Callable[[PreparedRun], dict[str, Any]] | None = None) -> None:
        """engine must already write to the store (a critical sink); the runner adds progress sinks per run."""
        self.schedule = schedule
        self.loaded = loaded
        self.engine = engine
        self.store = store
        self.clock = clock
        self.state = state or ScheduleState()
        self.snapshot = snapshot or (lambda prepared: {})
        self.run_sinks: Callable[[PreparedRun], list[Callable[[Record], None]]] = lambda prepared: []
        self.on_report: Callable[[RunReport], None] = lambda report: None
        self.on_wait: Callable[[float], None] = lambda slot_s: None
        self.on_skip: Callable[[float, str], None] = lambda slot_s, reason: None
        # called at the slot, just before the run; raising ends run() (a campaign checks disk and devices here)
        self.before_run: Callable[[float], None] = lambda slot_s: None
        self._stop = threading.Event()
        self._stop_reason = ""

    def stop(self, reason: str = "stop requested by operator") -> None:
        self._stop_reason = reason
        self._stop.set()
        self.engine.stop(reason)

    def _wait_until(self, slot_s: float) -> bool:
        """Let the clock reach slot_s in short steps; False if stopped meanwhile."""
        while not self._stop.is_set():
            remaining = slot_s - self.clock.now()
            if remaining <= 0:
                return True
            self.clock.sleep(min(WAIT_STEP_S, remaining))
        return False

    def _prepare(self) -> PreparedRun:
        s = self.state
        if self.schedule.config.follow_larmor and s.larmor_hz is not None:
            return prepare_run(self.schedule.sequence_path, self.loaded, store=self.store, larmor_hz=s.larmor_hz,
                               larmor_source=s.larmor_source)
        return prepare_run(self.schedule.sequence_path, self.loaded, store=self.store)

    def run(self) -> ScheduleOutcome:
        cfg = self.schedule.config
        s = self.state
        prepared = self._prepare()  # a bad sequence fails here, before anything is energised
        while True:
            if cfg.count is not None and s.runs_done >= cfg.count:
                return ScheduleOutcome(EXIT_COMPLETED, f"all {cfg.count} run(s) done", s)
            now = self.clock.now()
            repeat = s.last_slot_s is not None and now <= s.last_slot_s
            slot = next_slot_s(self.schedule, s.last_slot_s if repeat else now, strictly_after=repeat)
            if slot is None:
                return ScheduleOutcome(EXIT_COMPLETED, f"no slot before {cfg.until}; {s.runs_done} run(s) done", s)
            self.on_wait(slot)
            if not self._wait_until(slot):
                return ScheduleOutcome(EXIT_STOPPED, self._stop_reason, s)
            if cfg.follow_larmor and s.larmor_hz is not None and s.larmor_hz != prepared.larmor_hz:
                prepared = with_larmor(prepared, self.loaded, s.larmor_hz, s.larmor_source)
            violations = check_all(prepared.timeline, self.loaded.config)
            if violations:
                return ScheduleOutcome("refused", "; ".join(str(v) for v in violations), s)
            occurrence = s.runs_done
            snapshot = {**self.snapshot(prepared), "schedule": {
                "name": cfg.name, "file": self.schedule.path, "occurrence": occurrence, "slot_s": slot,
                "larmor_hz": prepared.larmor_hz, "larmor_source": prepared.larmor_source}}
            self.engine.best_effort_sinks[:] = self.run_sinks(prepared)
            if self._stop.is_set():
                return ScheduleOutcome(EXIT_STOPPED, self._stop_reason, s)
            self.before_run(slot)
            try:
                outcome = self.engine.run(prepared.timeline, snapshot)
            except CoilTooWarmError as exc:
                s.skipped += 1
                s.last_slot_s = slot
                self.on_skip(slot, str(exc))
                continue
            except TripLatchedError as exc:
                return ScheduleOutcome(EXIT_INTERLOCK, str(exc), s)
            s.runs_done += 1
            s.last_slot_s = slot
            s.run_ids.append(outcome.run_id)
            result: dict[str, Any] = {}
            try:
                result = finish_run(prepared, self.loaded, self.store, outcome.run_id, self.clock.now())
            except PrecessError as exc:
                result = {"analysis_error": str(exc)}
            if result.get("frequency_hz") is not None and outcome.exit_status == EXIT_COMPLETED:
                s.larmor_hz = float(result["frequency_hz"])
                s.larmor_source = f"run {outcome.run_id} of schedule {cfg.name!r}"
            now = self.clock.now()
            upcoming = next_slot_s(self.schedule, max(now, slot), strictly_after=now <= slot)
            if cfg.count is not None and s.runs_done >= cfg.count:
                upcoming = None
            self.on_report(RunReport(occurrence, slot, outcome.run_id, outcome.exit_status, outcome.reason, result,
                                     s.larmor_hz, upcoming))
            if outcome.exit_status in (EXIT_INTERLOCK, EXIT_STOPPED):
                return ScheduleOutcome(outcome.exit_status, f"run {outcome.run_id}: {outcome.reason}", s)
            if outcome.exit_status == EXIT_FAILED:
                s.failures += 1
                if cfg.on_failure == "stop":
                    return ScheduleOutcome(EXIT_FAILED, f"run {outcome.run_id}: {outcome.reason}", s)


def utc_text(t_s: float) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%SZ", time.gmtime(t_s))
