"""`precess runs --db PATH`: list stored runs."""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

from controller.errors import InputError
from controller.store import Store

DEFAULT_DB = "precess-data/precess.sqlite"


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("runs", help="list the runs in a store")
    p.add_argument("--db", default=DEFAULT_DB, help=f"store file (default {DEFAULT_DB})")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(handler=run)


def _utc(t: float | None) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%S", time.gmtime(t)) if t else "-"


def run(args: argparse.Namespace) -> int:
    if not Path(args.db).exists():
        raise InputError(f"{args.db}: no such store (give --db PATH of an existing .sqlite file)")
    with Store(args.db) as store:
        runs = store.runs()
        for r in runs:
            results = store.results(r["run_id"])
            r["field_nt"] = results[-1].get("field_nt") if results else None
    if args.json:
        print(json.dumps(runs, indent=2))
        return 0
    if not runs:
        print(f"{args.db}: no runs stored")
        return 0
    print(f"{'run':12}  {'started (UTC)':19}  {'sequence':22} {'shots':>9}  {'status':10} {'field nT':>12}")
    for r in runs:
        shots = f"{r['shots_stored']}/{r['shots_planned']}"
        field = f"{r['field_nt']:.2f}" if r["field_nt"] is not None else "-"
        print(f"{r['run_id']:12}  {_utc(r['started_at_s']):19}  {r['sequence_name'][:22]:22} {shots:>9}  "
              f"{(r['exit_status'] or 'unfinished'):10} {field:>12}")
    return 0
