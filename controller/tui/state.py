"""What the TUI knows, built only from the events it receives (records and session events).

`LiveState.apply(event, wall_s)` folds one event in and returns the names of the parts that
changed, so the app redraws only those.  No driver is ever asked anything: the rig status is
the latest `StatusSample`, which carries the supervisor's derived values too (its thermal
model's coil temperature now and at the end of the present pulse, duty cycle...).
"""

from __future__ import annotations

import collections
from dataclasses import dataclass, field
from typing import Any

from controller.records import InterlockTripped, RunFinished, RunStarted, ShotAcquired, ShotAnalysed, StatusSample
from controller.tui.adapter import FitSummary, LiveViews, fit_from_result
from controller.tui.latch import STATE_CLEAR, STATE_TRIPPED
from controller.tui.session import LatchChanged, Notice, QueueChanged, RunBegins

LOG_LINES = 50


@dataclass
class RunProgress:
    run_id: str
    label: str
    shots_planned: int
    started_at_s: float
    planned_duration_s: float
    latest_at_s: float
    shots_done: int = 0
    exit_status: str = ""  # "" while running
    reason: str = ""


@dataclass(frozen=True)
class HistoryPoint:
    """One run's latest stacked fit, at the start of its latest shot (rig clock)."""

    run_id: str
    at_s: float
    field_nt: float
    field_sd_nt: float
    t2star_s: float
    t2star_sd_s: float


@dataclass(frozen=True)
class ShotFieldPoint:
    """The running FID fit's field after one shot of the latest run, at that shot's start (rig clock)."""

    run_id: str
    shot_index: int
    at_s: float
    field_nt: float
    field_sd_nt: float


@dataclass
class LiveState:
    rig_name: str
    simulated: bool
    run: RunProgress | None = None
    readings: dict[str, float] = field(default_factory=dict)
    status_at_s: float | None = None
    last_record_wall_s: float | None = None
    views: LiveViews | None = None
    fit: FitSummary | None = None
    fit_note: str = ""
    history: list[HistoryPoint] = field(default_factory=list)
    shot_fields: list[ShotFieldPoint] = field(default_factory=list)  # the latest FID run's, one per shot
    latch_state: str = STATE_CLEAR
    trip_reason: str = ""
    queue: tuple[str, ...] = ()
    queue_running: bool = False
    log: collections.deque = field(default_factory=lambda: collections.deque(maxlen=LOG_LINES))
    _pending_label: tuple[str, float] = ("", 0.0)

    @property
    def active(self) -> bool:
        return self.run is not None and not self.run.exit_status

    @property
    def clock_s(self) -> float | None:
        """The rig clock's latest time seen in any record."""
        return self.run.latest_at_s if self.run is not None else self.status_at_s

    def say(self, text: str, alarm: bool = False) -> None:
        self.log.append((text, alarm))

    # ---------------------------------------------------------------------------------------
    def apply(self, event: Any, wall_s: float) -> set[str]:
        """Fold one event in; returns the parts that changed."""
        if isinstance(event, (RunStarted, StatusSample, ShotAcquired, InterlockTripped, RunFinished, ShotAnalysed)):
            self.last_record_wall_s = wall_s
        handler = getattr(self, f"_on_{type(event).__name__}", None)
        return handler(event) if handler is not None else set()

    def _on_RunBegins(self, e: RunBegins) -> set[str]:
        self._pending_label = (e.label, e.planned_duration_s)
        return set()

    def _on_RunStarted(self, e: RunStarted) -> set[str]:
        label, duration = self._pending_label
        self.status_at_s = e.started_at_s
        self.run = RunProgress(run_id=e.run_id, label=label or e.sequence_name, shots_planned=e.shots_planned,
                               started_at_s=e.started_at_s, planned_duration_s=duration, latest_at_s=e.started_at_s)
        self.say(f"run {e.run_id} started: {self.run.label}")
        return {"run", "status"}

    def _on_StatusSample(self, e: StatusSample) -> set[str]:
        self.status_at_s = e.at_s
        self.readings = dict(e.readings)
        if self.run is not None and e.run_id == self.run.run_id:
            self.run.latest_at_s = max(self.run.latest_at_s, e.at_s)
        return {"status", "run"}

    def _on_ShotAcquired(self, e: ShotAcquired) -> set[str]:
        if self.run is not None and e.run_id == self.run.run_id:
            self.run.shots_done = e.shot_index + 1
            self.run.latest_at_s = max(self.run.latest_at_s, e.started_at_s)
        if e.bad:
            self.say(f"shot {e.shot_index + 1} marked bad: {', '.join(e.notes) or 'overrun'}", alarm=True)
        return {"run"}

    def _on_InterlockTripped(self, e: InterlockTripped) -> set[str]:
        self.status_at_s = e.at_s
        self.latch_state, self.trip_reason = STATE_TRIPPED, f"{e.check}: {e.reason}"
        self.say(f"TRIP {self.trip_reason}", alarm=True)
        return {"latch", "log", "status"}

    def _on_RunFinished(self, e: RunFinished) -> set[str]:
        if self.run is not None and e.run_id == self.run.run_id:
            self.run.exit_status, self.run.reason = e.exit_status, e.reason
            self.run.latest_at_s = max(self.run.latest_at_s, e.finished_at_s)
        self.status_at_s = e.finished_at_s
        self.readings = {**self.readings, "current_a": 0.0, "voltage_v": 0.0}
        self.say(f"run {e.run_id} {e.exit_status}: {e.reason}", alarm=e.exit_status not in ("completed", "stopped"))
        for failure in e.safe_state_failures:
            self.say(f"SAFE STATE NOT CONFIRMED: {failure}", alarm=True)
        return {"run", "status", "log"}

    def _on_ShotAnalysed(self, e: ShotAnalysed) -> set[str]:
        fit = fit_from_result(e.result)
        if fit is None or self.views is not None and self.views.run_id == e.run_id:
            return set()
        self.fit, self.fit_note = fit, ""
        return {"fit"}

    def _on_LiveViews(self, v: LiveViews) -> set[str]:
        self.views, self.fit, self.fit_note = v, v.fit, v.fit_note
        changed = {"views", "fit"}
        if v.fit is not None:
            point = HistoryPoint(v.run_id, v.at_s, v.fit.field_nt, v.fit.field_sd_nt, v.fit.t2star_s, v.fit.t2star_sd_s)
            if self.history and self.history[-1].run_id == v.run_id:
                self.history[-1] = point
            else:
                self.history.append(point)
            if self.shot_fields and self.shot_fields[-1].run_id != v.run_id:
                self.shot_fields = []
            self.shot_fields.append(ShotFieldPoint(v.run_id, v.shot_index, v.at_s, v.fit.field_nt, v.fit.field_sd_nt))
            changed.add("history")
        return changed

    def _on_LatchChanged(self, e: LatchChanged) -> set[str]:
        self.latch_state, self.trip_reason = e.state, e.reason
        return {"latch"}

    def _on_QueueChanged(self, e: QueueChanged) -> set[str]:
        self.queue, self.queue_running = e.labels, e.running
        return {"queue"}

    def _on_Notice(self, e: Notice) -> set[str]:
        self.say(e.text, e.alarm)
        return {"log"}
