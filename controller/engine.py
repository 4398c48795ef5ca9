"""The engine: runs a Timeline on a Rig, shot by shot, and always leaves the rig safe.

Per shot: coil path to polarise, current on (host-timed, status sampled every control
period), then the sample-locked segment (switch-off, pulses, acquisition) played and
recorded on the converter clock, then current off and recovery.  Records go to sinks:
critical sinks (the store) stop the run when they fail; best-effort sinks (live analysis,
progress) are logged and ignored.

Whatever happens - completion, stop request, Ctrl-C, a driver exception, a store failure -
the `finally` makes every driver safe and a RunFinished record is emitted with the exit
status and reason.

With a Supervisor (controller/supervisor/machine.py) every status sample is also checked:
a finding makes the rig safe at once, is latched and recorded (InterlockTripped), and ends
the run with exit status "interlock"; a store failure is the `store_failure` trip.
"""

from __future__ import annotations

import logging
import threading
import uuid
from dataclasses import dataclass
from typing import Any, Callable

from controller import __version__
from controller.clock import Clock
from controller.records import (
    EXIT_COMPLETED, EXIT_FAILED, EXIT_INTERLOCK, EXIT_STOPPED, Record, RunFinished, RunStarted, ShotAcquired,
    StatusSample,
)
from controller.rig import Rig
from controller.sequences.render import render_segment
from controller.sequences.timeline import Polarise, ShotPlan, SwitchOff, Timeline
from controller.supervisor.machine import InterlockTrip, Supervisor
from controller.thermal_plan import current_profile
from drivers.protocols import TimedSegmentBoard

log = logging.getLogger(__name__)
Sink = Callable[[Record], None]


class StopRequested(Exception):
    """Raised inside the run loop when stop() was called."""


class CriticalSinkError(Exception):
    """A critical sink (the store) failed; the run must stop."""


@dataclass
class RunOutcome:
    run_id: str
    exit_status: str
    reason: str
    shots_completed: int


class Engine:
    """Runs timelines on one rig.  Thread-safe stop(); run() is synchronous."""

    def __init__(self, rig: Rig, clock: Clock, control_period_s: float = 0.1,
                 supervisor: Supervisor | None = None) -> None:
        self.supervisor = supervisor
        self.rig = supervisor.watch(rig) if supervisor is not None else rig
        self.clock = clock
        self.control_period_s = control_period_s
        self.critical_sinks: list[Sink] = []
        self.best_effort_sinks: list[Sink] = []
        self._stop = threading.Event()
        self._stop_reason = ""
        self._shots_stored = 0  # ShotAcquired records the critical sinks accepted in this run

    def stop(self, reason: str = "stop requested by operator") -> None:
        self._stop_reason = reason
        self._stop.set()

    def emergency_stop(self, reason: str = "emergency stop by operator") -> list[str]:
        """Stop, and make the rig safe at once from the calling thread (the TUI key).

        Safe-state driver methods are idempotent; a driver must let them through while
        another thread waits on it.  Returns the steps that failed.
        """
        self.stop(reason)
        return self.rig.make_safe()

    # ------------------------------------------------------------------------------------
    def _emit(self, record: Record) -> None:
        for sink in self.critical_sinks:
            try:
                sink(record)
            except Exception as exc:
                raise CriticalSinkError(f"store failed: {exc}") from exc
        self._emit_best_effort(record)

    def _emit_best_effort(self, record: Record) -> None:
        for sink in self.best_effort_sinks:
            try:
                sink(record)
            except Exception:  # noqa: BLE001 - best effort by design
                log.exception("best-effort sink failed on %s", type(record).__name__)

    def _check_stop(self) -> None:
        if self._stop.is_set():
            raise StopRequested(self._stop_reason)

    def _wait(self, run_id: str, duration_s: float) -> None:
        """Let duration_s pass on the clock, sampling status every control period."""
        remaining = duration_s
        while remaining > 1e-12:
            self._check_stop()
            step = min(self.control_period_s, remaining)
            self.clock.sleep(step)
            remaining -= step
            self._status(run_id)

    def _status(self, run_id: str) -> None:
        if self.supervisor is not None:
            self._supervised_status(run_id)
            return
        readings = {"current_a": self.rig.supply.read_current(), "voltage_v": self.rig.supply.read_voltage()}
        if self.rig.board is not None:
            readings.update(self.rig.board.read_sensors())
        self._emit(StatusSample(run_id=run_id, at_s=self.clock.now(), readings=readings))

    def _supervised_status(self, run_id: str) -> None:
        """Sample, check; on a finding make the rig safe before anything else, then record and stop."""
        readings = self.supervisor.read(self.rig)
        derived, finding = self.supervisor.evaluate(readings)
        now = self.clock.now()
        if finding is None:
            self._emit(StatusSample(run_id=run_id, at_s=now, readings=readings | derived))
            return
        failures = self.rig.make_safe()
        record = self.supervisor.trip(run_id, finding, now, failures)
        try:
            self._emit(StatusSample(run_id=run_id, at_s=now, readings=readings | derived))
            self._emit(record)
        except CriticalSinkError as exc:
            log.error("could not store the trip record (it is in the latch): %s", exc)
            self._emit_best_effort(record)
        raise InterlockTrip(record)

    # ------------------------------------------------------------------------------------
    def run(self, timeline: Timeline, config_snapshot: dict[str, Any], run_id: str | None = None) -> RunOutcome:
        run_id = run_id or uuid.uuid4().hex[:12]
        self._stop.clear()
        if self.supervisor is not None:  # refuses (raises) before anything is energised
            self.supervisor.begin(current_profile(timeline.shots), self.rig)
        status, reason, done = EXIT_FAILED, "did not start", 0
        started = False
        self._shots_stored = 0
        try:
            self._emit(RunStarted(run_id=run_id, started_at_s=self.clock.now(), sequence_name=timeline.sequence_name,
                                  sequence_kind=timeline.sequence_kind, shots_planned=len(timeline.shots),
                                  sample_rate_hz=timeline.sample_rate_hz,
                                  config={**config_snapshot, "drivers": self.rig.describe()},
                                  software_version=__version__, simulated=self.rig.simulated))
            started = True
            for shot in timeline.shots:
                self._check_stop()
                self._run_shot(run_id, shot, timeline.sample_rate_hz)
                done += 1
            status, reason = EXIT_COMPLETED, f"all {done} shot(s) acquired"
        except StopRequested as exc:
            status, reason = EXIT_STOPPED, str(exc) or "stop requested"
        except InterlockTrip as exc:
            status, reason = EXIT_INTERLOCK, f"interlock {exc}"
        except KeyboardInterrupt:
            status, reason = EXIT_STOPPED, "interrupted by operator (Ctrl-C / SIGTERM)"
            raise
        except CriticalSinkError as exc:
            status, reason = EXIT_FAILED, str(exc)
            if self.supervisor is not None:  # a store failure is a trip: safe at once, latched
                failures = self.rig.make_safe()
                record = self.supervisor.store_failure(run_id, str(exc), self.clock.now(), self._shots_stored, failures)
                self._emit_best_effort(record)
                status, reason = EXIT_INTERLOCK, f"interlock store_failure: {exc}"
        except Exception as exc:  # noqa: BLE001 - any driver error ends the run safely
            status, reason = EXIT_FAILED, f"{type(exc).__name__}: {exc}"
        finally:
            failures = tuple(self.rig.make_safe())
            finish = RunFinished(run_id=run_id, finished_at_s=self.clock.now(), exit_status=status, reason=reason,
                                 shots_completed=done, safe_state_failures=failures)
            if started:
                try:
                    self._emit(finish)
                except CriticalSinkError as exc:
                    log.error("could not record the end of run %s: %s", run_id, exc)
        return RunOutcome(run_id=run_id, exit_status=status, reason=reason, shots_completed=done)

    def _run_shot(self, run_id: str, shot: ShotPlan, sample_rate_hz: float) -> None:
        rig = self.rig
        waveforms = render_segment(shot, sample_rate_hz)
        (polarise,) = shot.of_kind(Polarise) or (None,)
        if polarise is not None:
            if rig.board is not None:
                rig.board.set_path("polarise")
            rig.supply.set_current(polarise.current_a)
            self._status(run_id)
            self._wait(run_id, shot.segment_start_s - polarise.start_s)
        self._check_stop()
        timed_board = rig.board if polarise is not None and isinstance(rig.board, TimedSegmentBoard) else None
        if timed_board is not None:
            timed_board.arm_segment(waveforms.gate, waveforms.tx, sample_rate_hz)
        recording = rig.transceiver.play_and_record(waveforms.gate, waveforms.tx)
        board_bad, board_notes = timed_board.finish_segment() if timed_board is not None else (False, ())
        rig.supply.output_off()
        if rig.board is not None:
            rig.board.set_path("idle")
        acquire_start, acquire_samples = shot.acquisition_span()
        offs = shot.of_kind(SwitchOff)
        switch_off_sample = offs[0].start_sample if offs else 0
        last_edge = shot.time_zero_sample(sample_rate_hz)
        samples = recording.samples.copy()
        samples.setflags(write=False)
        self._emit(ShotAcquired(
            run_id=run_id, shot_index=shot.index, started_at_s=recording.started_at_s,
            sample_rate_hz=recording.sample_rate_hz, channel_names=recording.channel_names, samples=samples,
            switch_off_sample=switch_off_sample, acquire_start_sample=acquire_start,
            acquire_samples=acquire_samples, dead_time_s=(acquire_start - last_edge) / sample_rate_hz,
            latency_samples=recording.latency_samples, bad=recording.overrun or board_bad,
            notes=recording.notes + board_notes))
        self._shots_stored += 1
        recovery = shot.duration_s - shot.segment_start_s - shot.segment_samples / sample_rate_hz
        self._wait(run_id, recovery)
