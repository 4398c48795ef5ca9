"""`precess campaign SCHEDULE --rig RIG --db PATH`: run a schedule for days, unattended.

Started again with the same arguments after a kill or a power cut, it resumes where it was
(controller/campaign/).  Beside the store it keeps a heartbeat (`PATH.heartbeat.json`), a
rotating log (`PATH.campaign.log`) and a lock (`PATH.campaign.lock`: one campaign per store).
On a simulated rig it runs on virtual time (a night in minutes); --realtime paces it.
SIGTERM or Ctrl-C stops it cleanly (the run in progress ends, the rig is made safe).

`precess campaign --status --db PATH` prints the heartbeat as one line; exit 0 while the
campaign is alive (running or waiting, heartbeat fresh), 1 otherwise.
"""

from __future__ import annotations

import argparse
import fcntl
import logging
import logging.handlers
import os
import signal
import sys
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Iterator

from controller.campaign.heartbeat import heartbeat_path, read_beat
from controller.campaign.resume import CampaignKey, last_sign_of_life_s, resume_clock_start_s
from controller.campaign.service import CampaignService
from controller.cli.cmd_runs import DEFAULT_DB
from controller.cli.common import SIMULATED_NOTE, existing_store, load_rig, open_rig, refused
from controller.cli.supervision import add_state_dir_argument, latch_for
from controller.clock import Clock, VirtualClock, WallClock
from controller.config.schedule import load_schedule, parse_time_s
from controller.errors import InputError, StoreError
from controller.runner import prepare_run
from controller.store import Store

EXIT_VIOLATIONS = 5
EXIT_NOT_ALIVE = 1
ALIVE_STATES = ("starting", "waiting", "running", "device-lost", "waiting-for-ack")
LOG_FORMAT = "%(asctime)sZ %(levelname)s %(name)s: %(message)s"


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("campaign", help="run a schedule unattended for days; resumes after a kill or power cut")
    p.add_argument("schedule", nargs="?", help="schedule file (TOML); its [campaign] table holds the settings")
    p.add_argument("--rig", help="rig file (TOML)")
    p.add_argument("--db", default=DEFAULT_DB, help=f"store file (default {DEFAULT_DB})")
    p.add_argument("--realtime", action="store_true", help="pace a simulated rig in real time")
    p.add_argument("--sim-start", metavar="TIME",
                   help="simulated rig only: start the virtual clock at this UTC time (e.g. 2026-06-21T17:55Z)")
    p.add_argument("--quiet", action="store_true", help="log to the file only, not to the terminal")
    p.add_argument("--status", action="store_true", help="print the heartbeat of the campaign writing --db and exit")
    p.add_argument("--stale-after", type=float, default=120.0, metavar="S",
                   help="with --status: a heartbeat older than this (wall clock) counts as dead (default 120)")
    add_state_dir_argument(p)
    p.set_defaults(handler=run)


def status(args: argparse.Namespace) -> int:
    beat = read_beat(heartbeat_path(args.db))
    if beat is None:
        raise InputError(f"{heartbeat_path(args.db)}: no heartbeat (no campaign has written to {args.db})")
    age_s = time.time() - beat.written_wall_s
    print(f"{beat.line()} written={age_s:.0f}s_ago")
    return 0 if beat.state in ALIVE_STATES and age_s <= args.stale_after else EXIT_NOT_ALIVE


@contextmanager
def store_lock(db: str) -> Iterator[None]:
    """One campaign per store: an exclusive lock the kernel releases when the process dies, however."""
    path = Path(f"{db}.campaign.lock")
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "a+", encoding="utf-8") as f:
        try:
            fcntl.flock(f, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            f.seek(0)
            raise InputError(f"{db}: another campaign is writing this store (pid {f.read().strip() or '?'}); "
                             "allowed: one campaign per store") from None
        f.seek(0)
        f.truncate()
        f.write(str(os.getpid()))
        f.flush()
        yield


@contextmanager
def campaign_logging(db: str, max_kb: int, backups: int, quiet: bool) -> Iterator[None]:
    """Everything logged goes to a rotating file beside the store (and the terminal unless quiet)."""
    formatter = logging.Formatter(LOG_FORMAT, datefmt="%Y-%m-%dT%H:%M:%S")
    formatter.converter = time.gmtime
    handlers: list[logging.Handler] = [logging.handlers.RotatingFileHandler(
        f"{db}.campaign.log", maxBytes=max_kb * 1000, backupCount=backups, encoding="utf-8")]
    if not quiet:
        handlers.append(logging.StreamHandler(sys.stdout))
    root = logging.getLogger()
    old_level, old_raise = root.level, logging.raiseExceptions
    logging.raiseExceptions = False  # a full disk must not turn a log line into a traceback
    root.setLevel(logging.INFO)
    for h in handlers:
        h.setFormatter(formatter)
        root.addHandler(h)
    try:
        yield
    finally:
        for h in handlers:
            root.removeHandler(h)
            h.close()
        root.setLevel(old_level)
        logging.raiseExceptions = old_raise


@contextmanager
def graceful_stop(service: CampaignService) -> Iterator[None]:
    """SIGTERM / SIGINT: stop cleanly (the run ends, the rig is made safe); a second one interrupts."""
    def handler(signum: int, frame: Any) -> None:
        if service._stop.is_set():
            raise KeyboardInterrupt
        service.stop(f"{signal.Signals(signum).name} received")

    old = {s: signal.signal(s, handler) for s in (signal.SIGTERM, signal.SIGINT)}
    try:
        yield
    finally:
        for s, h in old.items():
            signal.signal(s, h)


def campaign_clock(args: argparse.Namespace, simulated: bool, store: Store, key: CampaignKey) -> Clock:
    """Wall time on a real rig; on a simulated one virtual time that resumes after its last sign of life."""
    if not simulated:
        if args.sim_start:
            raise InputError("--sim-start is for simulated rigs only; a real rig runs on the wall clock")
        return WallClock()
    requested = parse_time_s(args.sim_start, "--sim-start", "TIME") if args.sim_start else time.time()
    beat = read_beat(heartbeat_path(store.path), strict=False)
    start = resume_clock_start_s(last_sign_of_life_s(store, key, beat), beat, time.time(), requested)
    return VirtualClock(start_epoch_s=start, pace=1.0 if args.realtime else 0.0)


def run(args: argparse.Namespace) -> int:
    if args.status:
        return status(args)
    if not args.schedule or not args.rig:
        raise InputError("campaign needs a schedule file and --rig RIG (or --status --db PATH)")
    schedule = load_schedule(args.schedule)
    loaded = load_rig(args.rig)
    latch = latch_for(loaded, args.state_dir)
    with existing_store(args.db) as lookup:
        prepared = prepare_run(schedule.sequence_path, loaded, store=lookup)
    if refused(prepared.timeline, loaded.config):
        return EXIT_VIOLATIONS
    cfg = schedule.config
    with store_lock(args.db), campaign_logging(args.db, cfg.campaign.log_max_kb, cfg.campaign.log_backups,
                                               args.quiet):
        store = Store(args.db)
        try:
            simulated = loaded.config.simulator is not None
            clock = campaign_clock(args, simulated, store, CampaignKey(cfg.name, loaded.config.name))
            print(SIMULATED_NOTE + " (virtual time)" if simulated else
                  "CAUTION: this campaign energises a real coil again and again for days with nobody at the rig; "
                  "keep the coil area closed off; see safety.md.", flush=True)
            service = CampaignService(schedule, loaded, store, clock, lambda: open_rig(loaded, clock), latch)
            with graceful_stop(service):
                outcome = service.run()
        finally:
            try:
                store.close()
            except StoreError as exc:  # e.g. a full disk: the outcome below says what happened
                logging.getLogger("precess.campaign").error("closing the store: %s", exc)
    print(f"campaign {cfg.name!r} {outcome.status}: {outcome.reason} ({outcome.runs_done} run(s) in all, "
          f"{outcome.shots_this_session} shot(s) in this session); the rig was left safe", flush=True)
    return outcome.exit_code
