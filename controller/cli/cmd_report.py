"""`precess report --db PATH [--run ID | --from T --to T] --out DIR`: PNG plots and a text summary."""

from __future__ import annotations

import argparse
from pathlib import Path

from controller.cli.selection import add_db_argument, add_selection_arguments, open_existing_store, selection_from
from controller.errors import InputError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("report", help="plots (PNG) and a text summary of a run or a time range")
    add_db_argument(p)
    add_selection_arguments(p)
    p.add_argument("--out", required=True, help="folder for the plots and summary.txt (created if missing)")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from controller.report.data import gather
    from controller.report.plots import plot_all
    from controller.report.summary import summary_lines

    out = Path(args.out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{out}: cannot create the report folder ({exc.strerror})") from None
    with open_existing_store(args.db) as store:
        sel = selection_from(args, store)
        data = gather(store, sel)
    if not data.runs:
        raise InputError(f"{args.db}: no runs in {sel.describe()}")
    lines = summary_lines(data)
    paths = plot_all(data, out, sel.describe())
    (out / "summary.txt").write_text("\n".join(lines) + "\n", encoding="utf-8")
    print("\n".join(lines))
    print(f"wrote {len(paths)} plot(s) and summary.txt to {out}")
    return 0
