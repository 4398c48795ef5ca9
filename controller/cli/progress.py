"""Progress lines for a run (best-effort record sink), shared by `precess run` and `precess schedule`."""

from __future__ import annotations

from typing import Any

import numpy as np

from controller.analysis.by_kind import fid_band
from controller.analysis.fid_entry import fid_options, fid_shot
from controller.analysis.pipeline import PreparedShot, analyse_prepared, prepare_shot
from controller.errors import PrecessError
from controller.records import InterlockTripped, Record, RunFinished, RunStarted, ShotAcquired
from controller.sequences.timeline import Timeline


class Progress:
    """One line per shot: what was stored and, for a FID run, the running fit of the shots so far.

    Each FID shot goes through the pipeline's per-shot steps once (prepare_shot); the joint
    fit then runs over all of them (analyse_prepared), the same functions as the stored-run
    analysis.
    """

    def __init__(self, out: Any, timeline: Timeline, spec: Any, indent: str = "",
                 full_scale_v: float | None = None) -> None:
        self.out = out
        self.timeline = timeline
        self.spec = spec
        self.indent = indent
        self.full_scale_v = full_scale_v
        self.prepared: list[PreparedShot] = []
        self.planned = len(timeline.shots)

    def _live(self, record: ShotAcquired) -> str:
        if self.timeline.sequence_kind != "fid" or record.bad or record.shot_index >= len(self.timeline.shots):
            return ""
        try:
            options = fid_options(record.channel_names, fid_band(self.timeline))
            shot = fid_shot(self.timeline.shots[record.shot_index], record, self.full_scale_v)
            self.prepared.append(prepare_shot(shot, options))
            r = analyse_prepared(self.prepared, options)
        except (PrecessError, ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            return f"; no fit yet ({exc})"
        if not r.detected:
            return f"; {len(self.prepared)} shot(s): no FID detected yet"
        return (f"; {len(self.prepared)} shot(s): f {r.frequency_hz:.3f} Hz, "
                f"B {r.field_nt:.2f} +/- {r.field_sd_nt:.2f} nT, SNR {r.snr:.1f}")

    def __call__(self, record: Record) -> None:
        if isinstance(record, RunStarted):
            self.planned = record.shots_planned
            print(f"{self.indent}run {record.run_id}: {record.sequence_name} ({record.sequence_kind}), "
                  f"{record.shots_planned} shot(s)", file=self.out, flush=True)
        elif isinstance(record, ShotAcquired):
            plan = self.timeline.shots[record.shot_index] if record.shot_index < len(self.timeline.shots) else None
            point = ""
            if plan is not None and self.timeline.series_name and plan.series_value is not None:
                point = f", {self.timeline.series_name} {plan.series_value:.6g} {self.timeline.series_unit}"
            print(f"{self.indent}  shot {record.shot_index + 1}/{self.planned} stored{point}, dead time "
                  f"{record.dead_time_s * 1e3:.1f} ms{self._live(record)}", file=self.out, flush=True)
        elif isinstance(record, InterlockTripped):
            print(f"{self.indent}  TRIP {record.check}: {record.reason}", file=self.out, flush=True)
        elif isinstance(record, RunFinished):
            print(f"{self.indent}run {record.run_id} {record.exit_status}: {record.reason}", file=self.out, flush=True)
