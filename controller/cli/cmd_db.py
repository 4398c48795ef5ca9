"""`precess db check|compact|measure`: look after a store file.

check    SQLite's own integrity check plus every shot's sample checksum, reported per run
compact  drop raw samples older than an age, keep shots' timing, checksums and all results
measure  (re)compute field readings per shot or per group of shots into the measurements table
"""

from __future__ import annotations

import argparse
import json
import time

from controller.cli.common import positive_int
from controller.cli.selection import add_db_argument, add_selection_arguments, open_existing_store, selection_from
from controller.store_maintenance import CheckReport, check_store, compact_samples

EXIT_PROBLEMS = 4


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("db", help="check, compact or re-measure a store file")
    db_sub = p.add_subparsers(dest="db_command", metavar="ACTION", parser_class=type(p))
    db_sub.required = True

    c = db_sub.add_parser("check", help="verify the file (SQLite check + per-shot sample checksums), per run")
    add_db_argument(c)
    c.add_argument("--quick", action="store_true", help="SQLite quick_check only, no sample checksums")
    c.add_argument("--json", action="store_true", help="print the report as JSON")
    c.set_defaults(handler=run_check)

    k = db_sub.add_parser("compact", help="drop raw samples older than an age; results and checksums stay")
    add_db_argument(k)
    k.add_argument("--older-than-days", type=float, required=True, metavar="DAYS",
                   help="compact shots recorded more than DAYS days ago")
    k.add_argument("--include-unanalysed", action="store_true",
                   help="also compact runs that have no result yet (their samples are their only data)")
    k.add_argument("--vacuum", action="store_true",
                   help="give the space back to the file system (needs free space about the file's size)")
    k.add_argument("--dry-run", action="store_true", help="only say what would be compacted")
    k.set_defaults(handler=run_compact)

    m = db_sub.add_parser("measure", help="fit the field per shot (or per group of shots) into the time series")
    add_db_argument(m)
    add_selection_arguments(m)
    m.add_argument("--group", type=positive_int, default=1, metavar="N", help="shots stacked per reading (default 1)")
    m.set_defaults(handler=run_measure)


def _check_lines(report: CheckReport) -> list[str]:
    sqlite_ok = report.sqlite_messages == ["ok"]
    lines = [f"store {report.path}: SQLite {'integrity' if report.checksums_verified else 'quick'} check "
             f"{'ok' if sqlite_ok else 'FAILED'}, foreign keys "
             f"{'ok' if not report.foreign_key_problems else f'{report.foreign_key_problems} problem(s)'}"]
    if not sqlite_ok:
        lines += [f"  sqlite: {message}" for message in report.sqlite_messages[:20]]
    for run in report.runs:
        status = run.exit_status or "unfinished"
        checks = ("checksums " + ("ok" if run.ok else f"MISMATCH in shot(s) {run.bad_checksums[:20]}")
                  if report.checksums_verified else "checksums not verified (--quick)")
        missing = f", missing shot index(es) {run.missing_indices[:20]}" if run.missing_indices else ""
        lines.append(f"run {run.run_id}  {status:10} {run.shots} shot(s), {run.compacted} compacted, {checks}{missing}")
    lines.append("result: ok" if report.ok else "result: PROBLEMS FOUND")
    return lines


def run_check(args: argparse.Namespace) -> int:
    report = check_store(args.db, verify_checksums=not args.quick)
    if args.json:
        runs = [dict(vars(r), ok=r.ok) for r in report.runs]
        print(json.dumps({"path": report.path, "ok": report.ok, "sqlite": report.sqlite_messages,
                          "foreign_key_problems": report.foreign_key_problems,
                          "checksums_verified": report.checksums_verified, "runs": runs}, indent=2))
    else:
        print("\n".join(_check_lines(report)))
    return 0 if report.ok else EXIT_PROBLEMS


def run_compact(args: argparse.Namespace) -> int:
    with open_existing_store(args.db) as store:
        result = compact_samples(store, args.older_than_days, time.time(), args.include_unanalysed, args.vacuum,
                                 args.dry_run)
    verb = "would compact" if result.dry_run else "compacted"
    print(f"{verb} {result.shots_compacted} shot(s), {result.bytes_freed / 1e6:.1f} MB of raw samples; "
          f"results, timing and checksums kept")
    if result.runs_skipped_unanalysed:
        print(f"kept the samples of {result.runs_skipped_unanalysed} run(s) with no result "
              "(analyse them first, or give --include-unanalysed)")
    if not result.dry_run:
        print(f"file: {result.file_bytes_before / 1e6:.1f} MB -> {result.file_bytes_after / 1e6:.1f} MB"
              + ("" if args.vacuum else " (freed pages are reused by new shots; --vacuum shrinks the file)"))
    return 0


def run_measure(args: argparse.Namespace) -> int:
    from controller.remeasure import remeasure

    with open_existing_store(args.db) as store:
        summary = remeasure(store, selection_from(args, store), args.group, time.time())
    for run_id, count, failed in summary:
        extra = f", {failed} group(s) could not be fitted" if failed else ""
        print(f"run {run_id}: {count} reading(s) of {args.group} shot(s){extra}")
    if not summary:
        print("no runs with raw samples in the selection")
    return 0
