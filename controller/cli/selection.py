"""Arguments shared by the store, export and report commands: --db, --run, --from/--to.

Times are UTC: `2026-06-21`, `2026-06-21T18:30`, `2026-06-21T18:30:05Z` or seconds since the
Unix epoch.
"""

from __future__ import annotations

import argparse
import calendar
import re
import time
from pathlib import Path

from controller.cli.cmd_runs import DEFAULT_DB
from controller.errors import InputError
from controller.store import Store
from controller.store_queries import Selection

_UTC_FORMATS = ("%Y-%m-%d", "%Y-%m-%dT%H:%M", "%Y-%m-%dT%H:%M:%S")


def parse_utc(text: str) -> float:
    """argparse type: a UTC date/time or epoch seconds -> epoch seconds."""
    value = text.strip()
    if re.fullmatch(r"\d+(\.\d*)?", value):
        return float(value)
    core = value[:-1] if value.endswith("Z") else value
    core = core.replace(" ", "T")
    for fmt in _UTC_FORMATS:
        try:
            return float(calendar.timegm(time.strptime(core, fmt)))
        except ValueError:
            continue
    raise argparse.ArgumentTypeError(
        f"{text!r} is not a UTC time; allowed: YYYY-MM-DD, YYYY-MM-DDTHH:MM[:SS][Z] or epoch seconds")


def add_db_argument(p: argparse.ArgumentParser) -> None:
    p.add_argument("--db", default=DEFAULT_DB, help=f"store file (default {DEFAULT_DB})")


def add_selection_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("--run", dest="run_id", help="one run (its id, as `precess runs` lists it, or 'latest')")
    p.add_argument("--from", dest="from_s", type=parse_utc, help="start of a time range (UTC)")
    p.add_argument("--to", dest="to_s", type=parse_utc, help="end of a time range (UTC)")


def selection_from(args: argparse.Namespace, store: Store) -> Selection:
    """The --run/--from/--to selection, with --run latest resolved in `store`."""
    if args.from_s is not None and args.to_s is not None and args.to_s <= args.from_s:
        raise InputError(f"--to ({args.to_s:.0f}) must come after --from ({args.from_s:.0f})")
    run_id = store.resolve_run_id(args.run_id) if args.run_id is not None else None
    return Selection(run_id=run_id, from_s=args.from_s, to_s=args.to_s)


def open_existing_store(path: str) -> Store:
    """Open a store that must already exist (reading commands never create an empty one)."""
    if not Path(path).is_file():
        raise InputError(f"{path}: no such store (give --db PATH of an existing .sqlite file)")
    return Store(path)
