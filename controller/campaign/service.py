"""The campaign service: a schedule run for days, unattended, that survives kills and drop-outs.

One `CampaignService.run()` is one session of the campaign process:

1. recover (controller/campaign/resume.py): close a run a kill left open, record the time the
   campaign was not running as a gap, analyse runs that have shots but no result, and
   rebuild the schedule's position from the store;
2. open the rig (a rig that cannot be opened counts as a device drop-out) and run the
   schedule (controller/schedule/execute.py) on the supervised engine;
3. before each run check the disk reserve and probe the devices; after each shot write the
   heartbeat and check the disk reserve again;
4. when a device drops out (a probe or a run fails with DriverError): make the rig safe, wait,
   try to reconnect every `retry_every_s`; when the devices answer again, record the gap and
   go on; after `device_wait_s`, stop;
5. when a trip is latched: stop, or (ack_wait_s > 0) wait for an operator's acknowledgement
   (`precess ack`); the campaign never clears a trip itself;
6. whatever ends the session, the rig is made safe and closed, and the end and its reason
   are written to the store (maintenance), the heartbeat and the log.

Time: everything waits on the injected clock, so a simulated campaign runs on virtual time.
"""

from __future__ import annotations

import logging
import os
import threading
import time
import uuid
from dataclasses import dataclass
from typing import Any, Callable

from controller.campaign import guards
from controller.campaign.heartbeat import (
    Beat, Heartbeat, TickingClock, heartbeat_path, read_beat, remove_stale_temporaries, utc_text,
)
from controller.campaign.resume import CampaignKey, record_event, recover, restored_state, runs_without_result
from controller.cli.common import config_snapshot
from controller.cli.supervision import supervised_engine
from controller.clock import Clock
from controller.config.loader import LoadedRig
from controller.config.schedule import Schedule
from controller.engine import Engine
from controller.errors import DriverError, InputError, PrecessError, StoreError
from controller.records import EXIT_COMPLETED, EXIT_FAILED, EXIT_INTERLOCK, EXIT_STOPPED, Record, RunStarted, ShotAcquired
from controller.rig import Rig
from controller.runner import PreparedRun, finish_run, prepare_run
from controller.schedule.execute import RunReport, ScheduleRunner
from controller.store import Store
from controller.supervisor.latch import TripLatch

log = logging.getLogger("precess.campaign")

#: Campaign end states and the exit code of `precess campaign` for each.
EXIT_CODES = {EXIT_COMPLETED: 0, EXIT_STOPPED: 0, "refused": 5, EXIT_FAILED: 3, "device-lost": 3,
              EXIT_INTERLOCK: 6, "disk-reserve": 7, "store-error": 4}
WAIT_STEP_S = 1.0


class DeviceLost(Exception):
    """A device did not answer the probe before a run."""


class DiskReserveReached(Exception):
    """The next run would eat into the disk reserve."""


@dataclass(frozen=True)
class CampaignOutcome:
    status: str  # a key of EXIT_CODES
    reason: str
    runs_done: int
    shots_this_session: int

    @property
    def exit_code(self) -> int:
        return EXIT_CODES[self.status]


class CampaignService:
    """Runs one session of a campaign; stop() is thread-safe (signal handlers call it)."""

    def __init__(self, schedule: Schedule, loaded: LoadedRig, store: Store, clock: Clock,
                 rig_factory: Callable[[], Rig], latch: TripLatch,
                 snapshot: Callable[[PreparedRun], dict[str, Any]] | None = None,
                 wall: Callable[[], float] = time.time) -> None:
        self.schedule = schedule
        self.loaded = loaded
        self.store = store
        self.cfg = schedule.config.campaign
        self.key = CampaignKey(schedule.config.name, loaded.config.name)
        self.rig_factory = rig_factory
        self.latch = latch
        # the runs' snapshot must name the rig: the campaign finds its runs by schedule and rig name
        self.snapshot = snapshot or (lambda prepared: config_snapshot(loaded, prepared.spec, schedule.sequence_path))
        self.session = uuid.uuid4().hex[:12]
        self.heartbeat = Heartbeat(heartbeat_path(store.path), Beat(
            state="starting", time_s=clock.now(), written_wall_s=wall(), schedule=self.key.schedule, rig=self.key.rig,
            store=str(store.path), pid=os.getpid(), session=self.session), self.cfg.heartbeat_every_s, wall,
            on_change=lambda beat: log.info("%s", beat.line()),
            on_error=lambda exc: log.error("heartbeat not written: %s", exc))
        self.clock = TickingClock(clock, self.heartbeat.tick)
        self.rig: Rig | None = None
        self.runner: ScheduleRunner | None = None
        self.run_sinks: Callable[[PreparedRun], list[Callable[[Record], None]]] = lambda prepared: []
        self.on_report: Callable[[RunReport], None] = lambda report: None
        self.shots_this_session = 0
        self._stop = threading.Event()
        self._stop_reason = ""
        self._disk_reason = ""
        self._device_reason = ""
        self._prepared: PreparedRun | None = None

    # ---- control ----------------------------------------------------------------------------
    def stop(self, reason: str = "stop requested") -> None:
        self._stop_reason = reason
        self._stop.set()
        if self.runner is not None:
            self.runner.stop(reason)

    def _beat(self, **changes: Any) -> None:
        self.heartbeat.update(self.clock.now(), **changes)

    def _event(self, event: str, **detail: Any) -> None:
        record_event(self.store, self.clock.now(), self.key, event, self.session, **detail)

    def _pause(self, duration_s: float) -> None:
        """Let duration_s pass on the campaign clock in short steps; returns early on stop()."""
        end = self.clock.now() + duration_s
        while not self._stop.is_set() and self.clock.now() < end:
            self.clock.sleep(min(WAIT_STEP_S, end - self.clock.now()))

    # ---- the session ------------------------------------------------------------------------
    def run(self) -> CampaignOutcome:
        self._check_reserve_setting()
        outcome: CampaignOutcome | None = None
        try:
            state = self._recover()
            self._event("start", pid=os.getpid(), runs_done=state.runs_done)
            self._beat(runs_done=state.runs_done)
            outcome = self._session(state)
        except StoreError as exc:
            outcome = self._ended("store-error", str(exc))
        except KeyboardInterrupt:
            outcome = self._ended(EXIT_STOPPED, "interrupted")
            raise
        except PrecessError as exc:
            outcome = self._ended(EXIT_FAILED, str(exc))
            raise
        finally:
            guards.close_rig(self.rig)
            self._finish(outcome or self._ended(EXIT_FAILED, "ended by an unexpected error (see the log)"))
        return outcome

    def _check_reserve_setting(self) -> None:
        floor = self.loaded.config.supervisor.min_disk_free_mb
        if self.cfg.disk_reserve_mb < floor:
            raise InputError(f"{self.schedule.path}: campaign.disk_reserve_mb = {self.cfg.disk_reserve_mb:g} is below "
                             f"the rig's supervisor.min_disk_free_mb ({floor:g}): the supervisor would trip before "
                             f"the campaign stops cleanly; allowed: at least {floor:g}")

    def _recover(self) -> Any:
        beat = read_beat(self.heartbeat.path, strict=False)
        remove_stale_temporaries(self.heartbeat.path)
        now = self.clock.now()
        recovery = recover(self.store, self.key, now, beat)
        for run_id in recovery.closed_runs:
            log.warning("run %s was left open by a killed session: closed as failed (its stored shots are kept)", run_id)
        if recovery.gap is not None:
            log.warning("gap recorded %s .. %s: %s", utc_text(recovery.gap[0]), utc_text(recovery.gap[1]),
                        recovery.gap[2])
        for run in runs_without_result(self.store, self.key):
            self._analyse_late(run.run_id)
        return restored_state(self.store, self.key)

    def _analyse_late(self, run_id: str) -> None:
        """Analyse a run whose session ended before its result was stored (same sequence, same frequency)."""
        stored = self.store.run(run_id)["config"].get("schedule", {})
        try:
            prepared = prepare_run(self.schedule.sequence_path, self.loaded, store=self.store,
                                   larmor_hz=stored.get("larmor_hz"), larmor_source=stored.get("larmor_source", ""))
            result = finish_run(prepared, self.loaded, self.store, run_id, self.clock.now())
            log.info("run %s analysed on resume: %s", run_id, result.get("headline", {}).get("text", "no result"))
        except StoreError:
            raise
        except (PrecessError, ValueError, ArithmeticError) as exc:
            log.warning("run %s could not be analysed on resume: %s", run_id, exc)

    def _session(self, state: Any) -> CampaignOutcome:
        if self.latch.latched and not self._await_ack("a trip was latched before the campaign started"):
            return self._gave_up(EXIT_INTERLOCK, self._latched_reason())
        try:
            self.rig = self.rig_factory()
        except (DriverError, OSError) as exc:
            if not self._await_devices(f"the rig could not be opened: {exc}"):
                return self._gave_up("device-lost", self._device_reason)
        self.runner = runner = ScheduleRunner(self.schedule, self.loaded, self._engine(), self.store, self.clock,
                                              state, snapshot=self._snapshot)
        runner.run_sinks = self._sinks_for
        runner.before_run = self._before_run
        runner.on_wait = lambda slot_s: self._beat(state="waiting", next_slot_s=slot_s, run_id=None, shot=None)
        runner.on_report = self._report
        runner.on_skip = lambda slot_s, reason: log.warning("slot %s skipped: %s", utc_text(slot_s), reason)
        if self._stop.is_set():
            runner.stop(self._stop_reason)
        while True:
            try:
                result = runner.run()
            except DeviceLost as exc:
                if not self._await_devices(str(exc)):
                    return self._gave_up("device-lost", self._device_reason)
                continue
            except DiskReserveReached as exc:
                return self._ended("disk-reserve", str(exc))
            if result.status == EXIT_STOPPED:
                if self._disk_reason:
                    return self._ended("disk-reserve", self._disk_reason)
                return self._ended(EXIT_STOPPED, self._stop_reason or result.reason)
            if result.status == EXIT_INTERLOCK:
                if self._await_ack(result.reason):
                    continue
                return self._gave_up(EXIT_INTERLOCK, result.reason)
            return self._ended(result.status, result.reason)  # completed, refused, failed (not a device)

    def _engine(self) -> Engine:
        assert self.rig is not None
        return supervised_engine(self.loaded, self.rig, self.clock, self.store, self.latch)

    def _snapshot(self, prepared: PreparedRun) -> dict[str, Any]:
        return {**self.snapshot(prepared), "campaign": {"session": self.session}}

    def _runs_done(self) -> int:
        return self.runner.state.runs_done if self.runner is not None else self.heartbeat.beat.runs_done

    def _ended(self, status: str, reason: str) -> CampaignOutcome:
        return CampaignOutcome(status, reason, self._runs_done(), self.shots_this_session)

    def _gave_up(self, status: str, reason: str) -> CampaignOutcome:
        """The end after a wait: a stop requested meanwhile is a stop, else `status`."""
        if self._stop.is_set():
            return self._ended(EXIT_STOPPED, f"{self._stop_reason} (while waiting: {reason})")
        return self._ended(status, reason)

    def _finish(self, outcome: CampaignOutcome) -> None:
        state = {EXIT_COMPLETED: "completed", EXIT_STOPPED: "stopped"}.get(outcome.status, "failed")
        if outcome.status == "disk-reserve":
            state = "stopped"
        self._beat(state=state, reason=f"{outcome.status}: {outcome.reason}", runs_done=outcome.runs_done,
                   run_id=None, shot=None, next_slot_s=None)
        try:
            self._event("end", status=outcome.status, reason=outcome.reason, runs_done=outcome.runs_done,
                        shots=outcome.shots_this_session)
        except StoreError as exc:
            log.error("the end of the campaign could not be stored: %s", exc)
        log.info("campaign %r %s: %s (%d run(s) in all, %d shot(s) in this session)", self.key.schedule,
                 outcome.status, outcome.reason, outcome.runs_done, outcome.shots_this_session)

    # ---- per run and per shot ---------------------------------------------------------------
    def _sinks_for(self, prepared: PreparedRun) -> list[Callable[[Record], None]]:
        self._prepared = prepared  # the runner asks for the sinks just before before_run
        return [self._shot_sink(prepared), *self.run_sinks(prepared)]

    def _before_run(self, slot_s: float) -> None:
        assert self.rig is not None and self._prepared is not None
        short = guards.reserve_shortfall(guards.disk_free_mb(self.rig, self.store),
                                         guards.run_mb(self._prepared.timeline), self.cfg.disk_reserve_mb,
                                         "the next run")
        if short:
            raise DiskReserveReached(short)
        try:
            guards.probe(self.rig)
        except DriverError as exc:
            raise DeviceLost(f"a device did not answer before the run at {utc_text(slot_s)}: {exc}") from None

    def _shot_sink(self, prepared: PreparedRun) -> Callable[[Record], None]:
        shots = prepared.timeline.shots

        def sink(record: Record) -> None:
            if isinstance(record, RunStarted):
                self._beat(state="running", run_id=record.run_id, shot=0, shots_planned=record.shots_planned,
                           next_slot_s=None)
            elif isinstance(record, ShotAcquired):
                self.shots_this_session += 1
                self.heartbeat.update(self.clock.now(), force=True, shot=record.shot_index + 1, last_shot={
                    "run_id": record.run_id, "shot_index": record.shot_index, "at_s": record.started_at_s})
                following = [s for s in shots if s.index > record.shot_index][:1]
                if following:
                    assert self.rig is not None and self.runner is not None
                    short = guards.reserve_shortfall(guards.disk_free_mb(self.rig, self.store),
                                                     guards.shot_mb(following[0]), self.cfg.disk_reserve_mb,
                                                     "the next shot")
                    if short:
                        self._disk_reason = short
                        self.runner.stop(f"stopped at the disk reserve: {short}")
        return sink

    def _report(self, report: RunReport) -> None:
        headline = report.result.get("headline", {}).get("text") or report.result.get("analysis_error", "no result")
        log.info("run %s (occurrence %d, slot %s) %s: %s", report.run_id, report.occurrence + 1,
                 utc_text(report.slot_s), report.exit_status, headline)
        assert self.runner is not None
        self._beat(runs_done=self.runner.state.runs_done)
        self.on_report(report)
        if report.exit_status == EXIT_FAILED:  # a device that stopped answering: wait for it now
            cause = self._device_failure()
            if cause is not None:
                raise DeviceLost(f"run {report.run_id}: {report.reason} ({cause})")

    # ---- waiting for devices and operators --------------------------------------------------
    def _device_failure(self) -> str | None:
        """After a failed run: None if every device still answers, else what did not."""
        if self.rig is None:
            return "no rig"
        try:
            guards.probe(self.rig)
        except DriverError as exc:
            return str(exc)
        return None

    def _await_devices(self, cause: str) -> bool:
        """Rig safe, then reconnect every retry_every_s until the devices answer (True) or device_wait_s is up."""
        lost_at = self.clock.now()
        log.warning("device dropped out: %s; the rig is made safe; waiting up to %g s for it", cause,
                    self.cfg.device_wait_s)
        self._event("device_lost", reason=cause)
        self._beat(state="device-lost", reason=cause, run_id=None, shot=None)
        guards.close_rig(self.rig)
        self.rig, last, attempts = None, cause, 0
        while True:
            attempts += 1
            rig = None
            try:
                rig = self.rig_factory()
                guards.make_safe_and_probe(rig)
                self.rig = rig
                break
            except (DriverError, OSError) as exc:
                last = str(exc)
                guards.close_rig(rig)
            waited = self.clock.now() - lost_at
            if self._stop.is_set() or waited >= self.cfg.device_wait_s:
                why = "stop requested" if self._stop.is_set() else f"not back within {self.cfg.device_wait_s:g} s"
                self._device_reason = f"device dropped out ({cause}); {why} (last attempt: {last})"
                self.store.record_gap(None, lost_at, self.clock.now(), self._device_reason)
                return False
            self._pause(min(self.cfg.retry_every_s, self.cfg.device_wait_s - waited))
        back_after = self.clock.now() - lost_at
        reason = f"device dropped out ({cause}); back after {back_after:.0f} s ({attempts} attempt(s))"
        self.store.record_gap(None, lost_at, self.clock.now(), reason)
        self._event("device_back", reason=reason, attempts=attempts)
        log.info("devices answer again after %.0f s; the campaign continues", back_after)
        if self.runner is not None:
            self.runner.engine = self._engine()
        return True

    def _latched_reason(self) -> str:
        trips = self.latch.trips()
        return f"trip latched: {trips[-1]['check']}: {trips[-1]['reason']}" if trips else "trip latched"

    def _await_ack(self, cause: str) -> bool:
        """Wait up to ack_wait_s for an operator to acknowledge the latched trip; never clears it."""
        if self.cfg.ack_wait_s <= 0 or self._stop.is_set():
            return False
        guards.close_rig(self.rig)
        tripped_at = self.clock.now()
        log.warning("%s; the rig is safe; waiting up to %g s for an operator to acknowledge it (precess ack)",
                    cause, self.cfg.ack_wait_s)
        self._event("trip_wait", reason=cause)
        self._beat(state="waiting-for-ack", reason=cause, run_id=None, shot=None)
        while self.latch.latched:
            waited = self.clock.now() - tripped_at
            if self._stop.is_set() or waited >= self.cfg.ack_wait_s:
                self.store.record_gap(None, tripped_at, self.clock.now(),
                                      f"{cause}; not acknowledged within {self.cfg.ack_wait_s:g} s")
                return False
            self._pause(min(self.cfg.retry_every_s, self.cfg.ack_wait_s - waited))
        self.store.record_gap(None, tripped_at, self.clock.now(), f"{cause}; acknowledged by an operator")
        self._event("trip_acknowledged", reason=cause)
        log.info("the trip was acknowledged; the campaign continues")
        self.rig = None
        return self._reopen("reopening the rig after the acknowledged trip") if self.runner is not None else True

    def _reopen(self, why: str) -> bool:
        """A fresh rig and engine (a new supervisor); a rig that does not answer is a drop-out."""
        rig = None
        try:
            rig = self.rig_factory()
            guards.make_safe_and_probe(rig)
        except (DriverError, OSError) as exc:
            guards.close_rig(rig)
            return self._await_devices(f"{why}: {exc}")
        self.rig = rig
        if self.runner is not None:
            self.runner.engine = self._engine()
        return True
