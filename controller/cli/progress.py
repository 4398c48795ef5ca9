"""Progress lines for a run (best-effort record sink), shared by `precess run` and `precess schedule`."""

from __future__ import annotations

from typing import Any

from controller.analysis.by_kind import analyse_run
from controller.records import InterlockTripped, Record, RunFinished, RunStarted, ShotAcquired
from controller.sequences.timeline import Timeline


class Progress:
    """One line per shot: what was stored and, for a FID run, the running fit of the stack so far."""

    def __init__(self, out: Any, timeline: Timeline, spec: Any, indent: str = "") -> None:
        self.out = out
        self.timeline = timeline
        self.spec = spec
        self.indent = indent
        self.shots: list[ShotAcquired] = []
        self.planned = len(timeline.shots)

    def _live(self) -> str:
        if self.timeline.sequence_kind != "fid":
            return ""
        try:
            r = analyse_run(self.timeline, self.spec, self.shots)
            return (f"; stack of {len(self.shots)}: f {r['frequency_hz']:.3f} Hz, "
                    f"B {r['field_nt']:.2f} +/- {r['field_sd_nt']:.2f} nT, SNR {r['snr']:.1f}")
        except (ValueError, ArithmeticError) as exc:
            return f"; no fit yet ({exc})"

    def __call__(self, record: Record) -> None:
        if isinstance(record, RunStarted):
            self.planned = record.shots_planned
            print(f"{self.indent}run {record.run_id}: {record.sequence_name} ({record.sequence_kind}), "
                  f"{record.shots_planned} shot(s)", file=self.out, flush=True)
        elif isinstance(record, ShotAcquired):
            self.shots.append(record)
            plan = self.timeline.shots[record.shot_index] if record.shot_index < len(self.timeline.shots) else None
            point = ""
            if plan is not None and self.timeline.series_name and plan.series_value is not None:
                point = f", {self.timeline.series_name} {plan.series_value:.6g} {self.timeline.series_unit}"
            print(f"{self.indent}  shot {record.shot_index + 1}/{self.planned} stored{point}, dead time "
                  f"{record.dead_time_s * 1e3:.1f} ms{self._live()}", file=self.out, flush=True)
        elif isinstance(record, InterlockTripped):
            print(f"{self.indent}  TRIP {record.check}: {record.reason}", file=self.out, flush=True)
        elif isinstance(record, RunFinished):
            print(f"{self.indent}run {record.run_id} {record.exit_status}: {record.reason}", file=self.out, flush=True)
