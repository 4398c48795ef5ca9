"""`precess ack --rig RIG`: show a rig's latched trips and, with a deliberate confirmation, clear them.

The confirmation is the rig's name, typed back (`--confirm NAME`, or at the prompt when
stdin is a terminal).  Acknowledging says: the cause was found and the rig is safe to
energise again.  Each acknowledgement is logged beside the latch.
"""

from __future__ import annotations

import argparse
import sys

from controller.cli.common import load_rig
from controller.cli.supervision import add_state_dir_argument, latch_for
from controller.errors import InputError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("ack", help="show and acknowledge a rig's latched interlock trip")
    p.add_argument("--rig", required=True, help="rig file (TOML)")
    p.add_argument("--confirm", metavar="RIG_NAME", help="the rig's name, typed back, to clear the latch")
    p.add_argument("--note", default="", help="what was found and done (kept in the acknowledgement log)")
    p.add_argument("--show", action="store_true", help="only show the latch; clear nothing")
    add_state_dir_argument(p)
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    latch = latch_for(loaded, args.state_dir)
    lines = latch.describe()
    if not lines:
        print(f"rig {latch.rig_name!r}: no trip latched")
        return 0
    print(f"rig {latch.rig_name!r}: {len(lines)} latched trip(s) ({latch.path}):")
    for line in lines:
        print(f"  {line}")
    if args.show:
        return 0
    confirmation = args.confirm
    if confirmation is None:
        if not sys.stdin.isatty():
            raise InputError(f"to clear it, give --confirm with the rig's name ({latch.rig_name!r})")
        print("Acknowledge only when the cause is found and the rig is safe to energise.")
        confirmation = input(f"type the rig's name ({latch.rig_name}) to acknowledge: ")
    cleared = latch.acknowledge(confirmation, args.note)
    print(f"acknowledged {len(cleared)} trip(s); the rig may run again (logged in {latch.ack_log})")
    return 0
