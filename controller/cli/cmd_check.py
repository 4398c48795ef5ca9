"""`precess check SEQUENCE --rig RIG`: the timeline in words and every limit violation, no hardware touched."""

from __future__ import annotations

import argparse

from controller.checks import check_all, predicted_peak_temperature_c
from controller.cli.common import load_and_compile, load_rig, positive_int
from controller.rigmodel import coil_model
from controller.sequences.describe import describe_timeline

EXIT_VIOLATIONS = 5


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("check", help="show a sequence's timeline and check it against the rig's limits")
    p.add_argument("sequence", help="sequence file (TOML)")
    p.add_argument("--rig", required=True, help="rig file (TOML)")
    p.add_argument("--shots", type=positive_int, help="override the number of shots")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    spec, timeline = load_and_compile(args.sequence, loaded, args.shots)
    for line in describe_timeline(timeline):
        print(line)
    coil = coil_model(loaded.config.coil)
    print(f"coil: R20 {coil.resistance_20c_ohm:.3f} ohm, L {coil.inductance_h * 1e3:.2f} mH, "
          f"{coil.field_per_amp_t * 1e3:.3f} mT/A; predicted peak temperature "
          f"{predicted_peak_temperature_c(timeline, loaded.config):.1f} C")
    violations = check_all(timeline, loaded.config)
    if not violations:
        print("limits: all checks pass")
        return 0
    print(f"limits: {len(violations)} violation(s); a run would be refused:")
    for v in violations:
        print(f"  - {v}")
    return EXIT_VIOLATIONS
