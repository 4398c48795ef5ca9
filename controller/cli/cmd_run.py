"""`precess run SEQUENCE --rig RIG`: acquire, store and analyse; progress per shot, then the fitted result."""

from __future__ import annotations

import argparse
import dataclasses
import sys
from pathlib import Path
from typing import Any

from controller.cli.cmd_runs import DEFAULT_DB
from controller.cli.common import (
    SIMULATED_NOTE, config_snapshot, existing_store, load_rig, make_clock, open_rig, positive_int, real_rig_caution,
    refused, to_json,
)
from controller.cli.progress import Progress
from controller.cli.supervision import add_state_dir_argument, latch_for, supervised_engine
from controller.cooling import insert_cooling_pauses, plan_cooling_pauses
from controller.errors import InputError
from controller.records import EXIT_COMPLETED
from controller.runner import finish_run, prepare_run, run_snapshot
from controller.sequences.timeline import Polarise
from controller.store import Store

EXIT_VIOLATIONS = 5
EXIT_RUN_NOT_COMPLETED = 3


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("run", help="run a sequence on a rig: acquire, store, analyse")
    p.add_argument("sequence", help="sequence file (TOML)")
    p.add_argument("--rig", required=True, help="rig file (TOML)")
    p.add_argument("--shots", type=positive_int, help="override the number of shots (per point for a series)")
    p.add_argument("--db", default=DEFAULT_DB, help=f"store file (default {DEFAULT_DB})")
    p.add_argument("--json", action="store_true", help="print the result as JSON (progress goes to stderr)")
    p.add_argument("--realtime", action="store_true", help="pace a simulated rig in real time")
    p.add_argument("--cooling-pauses", action="store_true",
                   help="insert the pauses the coil needs to stay within its temperature and duty limits")
    add_state_dir_argument(p)
    p.set_defaults(handler=run)




def run(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    latch = latch_for(loaded, args.state_dir)
    latch.require_clear()
    with existing_store(args.db) as lookup:  # the last measured Larmor frequency, if any
        prepared = prepare_run(args.sequence, loaded, shots=args.shots, store=lookup)
    if args.cooling_pauses:
        prepared = dataclasses.replace(prepared, timeline=_with_cooling_pauses(prepared.timeline, loaded))
    if refused(prepared.timeline, loaded.config):
        return EXIT_VIOLATIONS
    with Store(args.db) as store:
        out = sys.stderr if args.json else sys.stdout
        clock = make_clock(loaded, args.realtime)
        rig = open_rig(loaded, clock)
        if rig.simulated:
            print(SIMULATED_NOTE, file=out)
        else:
            current = max((e.current_a for s in prepared.timeline.shots for e in s.of_kind(Polarise)), default=0.0)
            print(real_rig_caution(loaded.config, current), file=out)
        for note in prepared.timeline.notes:
            print(f"note: {note}", file=out)
        engine = supervised_engine(loaded, rig, clock, store, latch)
        engine.best_effort_sinks.append(Progress(out, prepared.timeline, prepared.spec,
                                                 full_scale_v=loaded.config.receive.adc_full_scale_v))
        outcome = engine.run(prepared.timeline, run_snapshot(config_snapshot(loaded, prepared.spec, args.sequence),
                                                             prepared))
        rig.close()
        summary: dict[str, Any] = {"run_id": outcome.run_id, "exit_status": outcome.exit_status,
                                   "reason": outcome.reason, "db": str(Path(args.db))}
        summary.update(finish_run(prepared, loaded, store, outcome.run_id, clock.now()))
    if args.json:
        print(to_json(summary))
    else:
        print(f"stored run {summary['run_id']} in {summary['db']}")
        if "headline" in summary:
            print(f"result: {summary['headline']['text']}")
        if "calibration_file" in summary:
            print(f"wrote pulse calibration {summary['calibration_file']}")
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
