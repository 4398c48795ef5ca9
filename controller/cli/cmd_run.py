"""`precess run SEQUENCE --rig RIG`: acquire, store and analyse; progress per shot, then a summary."""

from __future__ import annotations

import argparse
import sys
from typing import Any

from controller.analysis.run_analysis import analyse_shots, window_of
from controller.checks import check_all
from controller.cli.cmd_runs import DEFAULT_DB
from controller.cli.common import (
    SIMULATED_NOTE, config_snapshot, load_and_compile, load_rig, make_clock, open_rig, positive_int,
    real_rig_caution, to_json,
)
from controller.cli.supervision import add_state_dir_argument, latch_for, supervised_engine
from controller.cooling import insert_cooling_pauses, plan_cooling_pauses
from controller.errors import InputError, PrecessError
from controller.records import EXIT_COMPLETED, InterlockTripped, Record, RunFinished, RunStarted, ShotAcquired
from controller.sequences.timeline import Polarise
from controller.store import Store

EXIT_VIOLATIONS = 5
EXIT_RUN_NOT_COMPLETED = 3


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("run", help="run a sequence on a rig: acquire, store, analyse")
    p.add_argument("sequence", help="sequence file (TOML)")
    p.add_argument("--rig", required=True, help="rig file (TOML)")
    p.add_argument("--shots", type=positive_int, help="override the number of shots")
    p.add_argument("--db", default=DEFAULT_DB, help=f"store file (default {DEFAULT_DB})")
    p.add_argument("--json", action="store_true", help="print the result as JSON (progress goes to stderr)")
    p.add_argument("--realtime", action="store_true", help="pace a simulated rig in real time")
    p.add_argument("--cooling-pauses", action="store_true",
                   help="insert the pauses the coil needs to stay within its temperature and duty limits")
    add_state_dir_argument(p)
    p.set_defaults(handler=run)


class Progress:
    """Best-effort sink: one line per shot with the running fit of the stack so far."""

    def __init__(self, out: Any) -> None:
        self.out = out
        self.windows: list = []
        self.planned = 0

    def __call__(self, record: Record) -> None:
        if isinstance(record, RunStarted):
            self.planned = record.shots_planned
            print(f"run {record.run_id}: {record.sequence_name}, {record.shots_planned} shot(s)", file=self.out)
        elif isinstance(record, ShotAcquired):
            self.windows.append(window_of(record.samples, record.channel_names, record.sample_rate_hz,
                                          record.acquire_start_sample, record.acquire_samples, record.dead_time_s))
            try:
                r = analyse_shots(self.windows)
                fit = f"f {r['frequency_hz']:.3f} Hz, B {r['field_nt']:.2f} +/- {r['field_sd_nt']:.2f} nT, SNR {r['snr']:.1f}"
            except (ValueError, ArithmeticError) as exc:
                fit = f"no fit yet ({exc})"
            print(f"  shot {record.shot_index + 1}/{self.planned} stored, dead time {record.dead_time_s * 1e3:.1f} ms;"
                  f" stack of {len(self.windows)}: {fit}", file=self.out, flush=True)
        elif isinstance(record, InterlockTripped):
            print(f"  TRIP {record.check}: {record.reason}", file=self.out, flush=True)
        elif isinstance(record, RunFinished):
            print(f"run {record.run_id} {record.exit_status}: {record.reason}", file=self.out)


def run(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    latch = latch_for(loaded, args.state_dir)
    latch.require_clear()
    spec, timeline = load_and_compile(args.sequence, loaded, args.shots)
    if args.cooling_pauses:
        timeline = _with_cooling_pauses(timeline, loaded)
    violations = check_all(timeline, loaded.config)
    if violations:
        for v in violations:
            print(f"precess: refused: {v}", file=sys.stderr)
        return EXIT_VIOLATIONS
    out = sys.stderr if args.json else sys.stdout
    clock = make_clock(loaded, args.realtime)
    rig = open_rig(loaded, clock)
    if rig.simulated:
        print(SIMULATED_NOTE, file=out)
    else:
        current = max((e.current_a for s in timeline.shots for e in s.of_kind(Polarise)), default=0.0)
        print(real_rig_caution(loaded.config, current), file=out)
    with Store(args.db) as store:
        engine = supervised_engine(loaded, rig, clock, store, latch)
        engine.best_effort_sinks.append(Progress(out))
        outcome = engine.run(timeline, config_snapshot(loaded, spec, args.sequence))
        shots = list(store.shots(outcome.run_id))
        summary: dict[str, Any] = {"run_id": outcome.run_id, "exit_status": outcome.exit_status,
                                   "reason": outcome.reason, "db": str(args.db), "shots": len(shots)}
        if shots:
            windows = [window_of(s.samples, s.channel_names, s.sample_rate_hz, s.acquire_start_sample,
                                 s.acquire_samples, s.dead_time_s) for s in shots if not s.bad]
            try:
                result = analyse_shots(windows)
            except (ValueError, ArithmeticError) as exc:
                raise PrecessError(f"run {outcome.run_id} stored, but the analysis failed: {exc}") from None
            store.add_result(outcome.run_id, "fid", result, clock.now())
            summary.update(result)
    if args.json:
        print(to_json(summary))
    else:
        print(f"stored run {summary['run_id']} ({summary['shots']} shot(s)) in {summary['db']}")
        if "field_nt" in summary:
            print(f"result: f = {summary['frequency_hz']:.4f} +/- {summary['frequency_sd_hz']:.4f} Hz, "
                  f"B = {summary['field_nt']:.2f} +/- {summary['field_sd_nt']:.2f} nT, "
                  f"T2* = {summary['t2star_s']:.3f} +/- {summary['t2star_sd_s']:.3f} s, SNR {summary['snr']:.1f}")
    return 0 if outcome.exit_status == EXIT_COMPLETED else EXIT_RUN_NOT_COMPLETED


def _with_cooling_pauses(timeline: Any, loaded: Any) -> Any:
    plan = plan_cooling_pauses(timeline.shots, loaded.config)
    if plan.infeasible_shots:
        raise InputError(f"shot(s) {', '.join(map(str, plan.infeasible_shots))} exceed the coil's limits even "
                         "from a cold coil; no pause can help")
    try:
        return insert_cooling_pauses(timeline, plan.pauses)
    except ValueError as exc:
        raise InputError(str(exc)) from None
