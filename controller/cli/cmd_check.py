"""`precess check SEQUENCE --rig RIG`: the timeline in words and every limit violation, no hardware touched."""

from __future__ import annotations

import argparse
import dataclasses

from controller.checks import check_all, planning_limit_c, predict_run_temperature
from controller.cli.common import existing_store, load_and_compile, load_rig, positive_int
from controller.cooling import insert_cooling_pauses, plan_cooling_pauses
from controller.rigmodel import coil_model
from controller.sequences.describe import describe_timeline

EXIT_VIOLATIONS = 5


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("check", help="show a sequence's timeline and check it against the rig's limits")
    p.add_argument("sequence", help="sequence file (TOML)")
    p.add_argument("--rig", required=True, help="rig file (TOML)")
    p.add_argument("--shots", type=positive_int, help="override the number of shots")
    p.add_argument("--start-c", type=float, help="coil temperature now (default the rig's ambient)")
    p.add_argument("--cooling-pauses", action="store_true",
                   help="show the cooling pauses that would keep the run within its limits, and check with them")
    p.add_argument("--db", help="store whose last measured Larmor frequency sets the pulses (if it exists)")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    with existing_store(args.db) as store:
        spec, timeline = load_and_compile(args.sequence, loaded, args.shots, store)
    for line in describe_timeline(timeline):
        print(line)
    cfg = loaded.config
    if args.cooling_pauses:
        plan = plan_cooling_pauses(timeline.shots, cfg, args.start_c)
        for pause in plan.pauses:
            print(f"cooling pause: {pause.pause_s:.1f} s before shot {pause.before_shot} ({pause.reason})")
        print(f"cooling pauses: {len(plan.pauses)}, {plan.total_pause_s:.1f} s in all"
              + (f"; shot(s) {', '.join(map(str, plan.infeasible_shots))} too hot even from cold"
                 if plan.infeasible_shots else ""))
        if plan.pauses and plan.pauses[0].before_shot == 0:
            print(f"wait {plan.pauses[0].pause_s:.0f} s for the coil to cool before starting")
            plan = dataclasses.replace(plan, pauses=plan.pauses[1:])
        timeline = insert_cooling_pauses(timeline, plan.pauses)
    coil = coil_model(cfg.coil)
    prediction = predict_run_temperature(timeline, cfg, args.start_c)
    print(f"coil: R20 {coil.resistance_20c_ohm:.3f} ohm, L {coil.inductance_h * 1e3:.2f} mH, "
          f"{coil.field_per_amp_t * 1e3:.3f} mT/A; predicted peak temperature "
          f"{prediction.peak_c:.1f} C at {prediction.peak_at_s:.1f} s (plans may reach {planning_limit_c(cfg):g} C)")
    violations = check_all(timeline, cfg, args.start_c)
    if not violations:
        print("limits: all checks pass")
        return 0
    print(f"limits: {len(violations)} violation(s); a run would be refused:")
    for v in violations:
        print(f"  - {v}")
    return EXIT_VIOLATIONS
