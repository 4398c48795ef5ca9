"""`precess tui --rig RIG`: run the rig and watch the FID live in a terminal (works over SSH).

Keys: ctrl+x emergency stop (every screen), ? help.  The engine runs on a worker thread under
the rig's supervisor; a trip stays latched (shared with `precess run` and `precess ack`) until
it is acknowledged.  When the UI ends for any reason the run is stopped and the rig made safe
before the command exits.
"""

from __future__ import annotations

import argparse
import sys

from controller.cli.cmd_runs import DEFAULT_DB
from controller.cli.common import load_rig, open_rig
from controller.cli.supervision import add_state_dir_argument
from controller.clock import Clock, VirtualClock, WallClock
from controller.config.loader import LoadedRig
from controller.errors import InputError

EXIT_NOT_SAFE = 3
EXIT_SIGNALLED = 130  # as for Ctrl-C in the other commands


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("tui", help="terminal UI: plan, run, watch and stop a rig (ctrl+x: emergency stop)")
    p.add_argument("--rig", required=True, help="rig file (TOML)")
    p.add_argument("--sequences", help="directory of sequence files (default: the sequences folder beside the rig's)")
    p.add_argument("--db", default=DEFAULT_DB, help=f"store file (default {DEFAULT_DB})")
    p.add_argument("--pace", type=_pace, default=1.0,
                   help="simulated rig only: seconds of real time per simulated second (1 = real time, 0 = flat out)")
    add_state_dir_argument(p)
    p.set_defaults(handler=run)


def _pace(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not 0.0 <= value <= 100.0:
        raise argparse.ArgumentTypeError(f"{value:g} is not allowed; must be 0 to 100")
    return value


def clock_for(loaded: LoadedRig, pace: float) -> Clock:
    """A paced virtual clock for a simulated rig (shots stream at `pace`), wall time otherwise."""
    if loaded.config.simulator is not None:
        return VirtualClock(pace=pace)
    return WallClock()


def run(args: argparse.Namespace) -> int:
    from controller.tui.app import PrecessApp  # textual is imported only for this command

    loaded = load_rig(args.rig)
    if not sys.stdout.isatty():
        raise InputError("precess tui needs a terminal (stdout is not a TTY); use `precess run` in scripts")
    clock = clock_for(loaded, args.pace)
    rig = open_rig(loaded, clock)
    app = PrecessApp(loaded, rig, clock, args.db, sequences_dir=args.sequences, state_dir=args.state_dir)
    try:
        app.run()  # SIGHUP (a dropped SSH link) and SIGTERM end it like q: run stopped first
    finally:
        finished = app.session.close()
        failures = rig.make_safe()  # the engine already did; this covers a UI that died mid-run
        for failure in failures:
            print(f"precess: rig not confirmed safe: {failure}", file=sys.stderr)
        if not finished:
            print("precess: the engine did not finish in time; check the rig", file=sys.stderr)
    if failures or not finished:
        return EXIT_NOT_SAFE
    if app.ended_by_signal:
        print(f"precess: {app.ended_by_signal}; the run was stopped and the rig made safe", file=sys.stderr)
        return EXIT_SIGNALLED
    return 0
