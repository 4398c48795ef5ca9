"""`precess schedule FILE --rig RIG`: run a schedule in the foreground, one line per run."""

from __future__ import annotations

import argparse
import sys

from controller.cli.cmd_runs import DEFAULT_DB
from controller.cli.common import (
    SIMULATED_NOTE, config_snapshot, existing_store, load_rig, make_clock, open_rig, positive_int, refused,
)
from controller.cli.progress import Progress
from controller.cli.supervision import add_state_dir_argument, latch_for, supervised_engine
from controller.config.schedule import load_schedule
from controller.errors import InputError
from controller.records import EXIT_COMPLETED
from controller.runner import prepare_run
from controller.schedule.execute import RunReport, ScheduleRunner, utc_text
from controller.schedule.plan import upcoming_slots
from controller.store import Store

EXIT_SCHEDULE_ENDED_EARLY = 3
EXIT_VIOLATIONS = 5


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("schedule", help="run a sequence on a schedule (every N s, within daily windows)")
    p.add_argument("schedule", help="schedule file (TOML)")
    p.add_argument("--rig", required=True, help="rig file (TOML)")
    p.add_argument("--db", default=DEFAULT_DB, help=f"store file (default {DEFAULT_DB})")
    p.add_argument("--plan", type=positive_int, metavar="N", help="only list the next N start times and exit")
    p.add_argument("--quiet", action="store_true", help="one line per run, no per-shot progress")
    p.add_argument("--realtime", action="store_true", help="pace a simulated rig in real time")
    add_state_dir_argument(p)
    p.set_defaults(handler=run)


def _report_line(report: RunReport) -> str:
    result = report.result.get("headline", {}).get("text") or report.result.get("analysis_error", "no result")
    following = f"; pulses follow {report.larmor_hz:.3f} Hz" if report.larmor_hz else ""
    upcoming = f"; next at {utc_text(report.next_slot_s)}" if report.next_slot_s is not None else ""
    return (f"[{report.occurrence + 1}] {utc_text(report.slot_s)} run {report.run_id} {report.exit_status}: "
            f"{result}{following}{upcoming}")


def run(args: argparse.Namespace) -> int:
    schedule = load_schedule(args.schedule)
    loaded = load_rig(args.rig)
    clock = make_clock(loaded, args.realtime)
    if args.plan:
        slots = upcoming_slots(schedule, clock.now(), args.plan)
        if not slots:
            raise InputError(f"{args.schedule}: no slot left (until {schedule.config.until})")
        for i, slot in enumerate(slots, 1):
            print(f"{i:4d}  {utc_text(slot)}")
        return 0
    latch = latch_for(loaded, args.state_dir)
    latch.require_clear()
    with existing_store(args.db) as lookup:
        prepared = prepare_run(schedule.sequence_path, loaded, store=lookup)
    if refused(prepared.timeline, loaded.config):
        return EXIT_VIOLATIONS
    with Store(args.db) as store:
        rig = open_rig(loaded, clock)
        cfg = schedule.config
        print(SIMULATED_NOTE if rig.simulated else "CAUTION: this schedule energises a real coil again and again "
              "without an operator at each run; keep the coil area closed off; see safety.md.")
        limit = f"{cfg.count} run(s)" if cfg.count else "no run limit"
        until = f", until {cfg.until}" if cfg.until else ""
        windows = f", windows {', '.join(cfg.windows)} ({cfg.timezone})" if cfg.windows else ""
        print(f"schedule {cfg.name!r}: {prepared.spec.name} every {cfg.every_s:g} s, {limit}{until}{windows}; "
              f"store {args.db}")
        runner = ScheduleRunner(schedule, loaded, supervised_engine(loaded, rig, clock, store, latch), store, clock,
                                snapshot=lambda p: config_snapshot(loaded, p.spec, schedule.sequence_path))
        if not args.quiet:
            runner.run_sinks = lambda p: [Progress(sys.stdout, p.timeline, p.spec, indent="    ")]
        runner.on_report = lambda report: print(_report_line(report), flush=True)
        runner.on_wait = lambda slot: print(f"waiting for {utc_text(slot)}", flush=True) if not args.quiet else None
        runner.on_skip = lambda slot, reason: print(f"slot {utc_text(slot)} skipped: {reason}", flush=True)
        outcome = runner.run()
    print(f"schedule {cfg.name!r} {outcome.status}: {outcome.reason} ({outcome.state.runs_done} run(s), "
          f"{outcome.state.failures} failed, {outcome.state.skipped} slot(s) skipped)")
    return 0 if outcome.status == EXIT_COMPLETED else EXIT_SCHEDULE_ENDED_EARLY
