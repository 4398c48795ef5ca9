"""`precess export --db PATH [--run ID | --from T --to T] --format F --out FILE`.

Formats: iaga2002 (total-field time series), jcampdx (one run's FID and spectrum), csv (field
readings), wav (raw shots, one channel per recorded channel), npz (readings and raw shots).
"""

from __future__ import annotations

import argparse
import dataclasses

from controller.cli.selection import add_db_argument, add_selection_arguments, open_existing_store, selection_from
from controller.config.loader import load_site
from controller.export import from_store
from controller.export.iaga2002 import DATA_TYPES
from controller.export.wav import ENCODINGS

FORMATS = ("iaga2002", "jcampdx", "csv", "wav", "npz")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("export", help="write stored data as IAGA-2002, JCAMP-DX, CSV, WAV or NumPy .npz")
    add_db_argument(p)
    add_selection_arguments(p)
    p.add_argument("--format", required=True, choices=FORMATS, help="output format")
    p.add_argument("--out", required=True, help="output file")
    g = p.add_argument_group("iaga2002")
    g.add_argument("--interval-s", type=float, default=60.0, help="spacing of the data records (default 60)")
    g.add_argument("--data-type", choices=DATA_TYPES, default="provisional", help="header 'Data Type'")
    g.add_argument("--source", help="header 'Source of Data' (default: the rig's name)")
    g.add_argument("--max-sd-nt", type=float, help="treat readings with a larger field uncertainty as missing")
    g.add_argument("--site", help="site TOML for the header, if the runs' stored configuration has none")
    j = p.add_argument_group("jcampdx / wav")
    j.add_argument("--shot", type=int, help="one shot (its index) instead of the stack (jcampdx) or all shots (wav)")
    w = p.add_argument_group("wav / npz")
    w.add_argument("--encoding", choices=ENCODINGS, default="float32", help="WAV sample format (default float32)")
    w.add_argument("--results-only", action="store_true", help="npz: readings only, no raw samples")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    site = dataclasses.asdict(load_site(args.site)) if args.site else None
    with open_existing_store(args.db) as store:
        sel = selection_from(args, store)
        if args.format == "iaga2002":
            message = from_store.export_iaga2002(store, sel, args.out, args.interval_s, args.data_type, args.source,
                                                 args.max_sd_nt, site)
        elif args.format == "jcampdx":
            message = from_store.export_jcampdx(store, sel, args.out, args.shot)
        elif args.format == "csv":
            message = from_store.export_csv(store, sel, args.out)
        elif args.format == "wav":
            message = from_store.export_wav(store, sel, args.out, args.encoding, args.shot)
        else:
            message = from_store.export_npz(store, sel, args.out, not args.results_only)
    print(message)
    return 0
