"""`precess coil record|identify|predict`: the coil's thermal model, measured and used.

record    drive the rig through a heating and cooling run and write the curve (CSV)
identify  fit one- and two-node thermal models to a curve; print the [coil] keys to use
predict   the coil temperature at every point of a planned run (summary, or CSV)
"""

from __future__ import annotations

import argparse
import sys

import numpy as np

from controller.checks import predict_run_temperature
from controller.cli.common import SIMULATED_NOTE, load_and_compile, load_rig, make_clock, open_rig, positive_int, \
    real_rig_caution, to_json
from controller.cli.supervision import add_state_dir_argument, latch_for
from controller.coil_identify import HeatingCurve, identify, read_curve_csv, write_curve_csv
from controller.coil_record import EXEMPT_CHECKS, record_heating_curve
from controller.errors import InputError
from controller.supervisor.machine import InterlockTrip, Supervisor
from controller.supervisor.measured import cold_resistance, expected_resistance_ohm

EXIT_TRIPPED = 3


def _positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"{text!r} is not a number") from None
    if not value > 0:
        raise InputError(f"{value} must be more than 0")
    return value


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("coil", help="the coil's thermal model: record a heating curve, identify, predict")
    coil = p.add_subparsers(dest="coil_command", metavar="ACTION", parser_class=type(p))
    coil.required = True

    r = coil.add_parser("record", help="heat and cool the coil under supervision; write the curve as CSV")
    r.add_argument("--rig", required=True, help="rig file (TOML)")
    r.add_argument("--out", required=True, help="CSV file to write")
    r.add_argument("--current-a", type=_positive_float, required=True, help="heating current")
    r.add_argument("--heat-s", type=_positive_float, default=600.0, help="heating time (default 600 s)")
    r.add_argument("--cool-s", type=_positive_float, default=900.0, help="cooling time (default 900 s)")
    r.add_argument("--period-s", type=_positive_float, default=2.0, help="sampling period (default 2 s)")
    r.add_argument("--sense-a", type=_positive_float, help="current while cooling (default a tenth of --current-a)")
    r.add_argument("--stop-at-c", type=float, help="stop heating here (default 5 K below the limit)")
    r.add_argument("--yes", action="store_true", help="confirm heating a real (non-simulated) coil")
    add_state_dir_argument(r)
    r.set_defaults(handler=run_record)

    i = coil.add_parser("identify", help="fit the thermal model to a recorded curve")
    i.add_argument("curve", help="CSV with time_s, current_a, temperature_c (optional voltage_v, thermistor_c)")
    i.add_argument("--rig", required=True, help="rig file (TOML): R20 and ambient")
    i.add_argument("--ambient-c", type=float, help="ambient during the record (default: the first temperature)")
    i.add_argument("--json", action="store_true", help="print JSON")
    i.set_defaults(handler=run_identify)

    q = coil.add_parser("predict", help="coil temperature at every point of a planned run")
    q.add_argument("sequence", help="sequence file (TOML)")
    q.add_argument("--rig", required=True, help="rig file (TOML)")
    q.add_argument("--shots", type=positive_int, help="override the number of shots")
    q.add_argument("--start-c", type=float, help="coil temperature at the start (default the rig's ambient)")
    q.add_argument("--csv", help="write time_s, current_a, temperature_c here")
    q.set_defaults(handler=run_predict)


def run_record(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    cfg = loaded.config
    if args.current_a > cfg.limits.max_current_a:
        raise InputError(f"--current-a {args.current_a:g} exceeds the rig's max_current_a {cfg.limits.max_current_a:g} A")
    latch = latch_for(loaded, args.state_dir)
    latch.require_clear()
    stop_at = args.stop_at_c if args.stop_at_c is not None else cfg.limits.max_coil_temperature_c - 5.0
    if stop_at > cfg.limits.max_coil_temperature_c:
        raise InputError(f"--stop-at-c {stop_at:g} is above the limit {cfg.limits.max_coil_temperature_c:g} C")
    clock = make_clock(loaded)
    if cfg.simulator is None:
        print(real_rig_caution(cfg, args.current_a))
        if not args.yes:
            raise InputError("heating a real coil for minutes needs --yes (read the caution above)")
    else:
        print(SIMULATED_NOTE)
    rig = open_rig(loaded, clock)
    supervisor = Supervisor(cfg, clock, latch=latch, skip=EXEMPT_CHECKS)
    try:
        curve = record_heating_curve(rig, clock, supervisor, args.current_a, args.heat_s, args.cool_s, args.period_s,
                                     args.sense_a or args.current_a / 10.0, stop_at)
    except InterlockTrip as exc:
        print(f"precess: TRIP {exc}; the rig was made safe and the trip is latched", file=sys.stderr)
        return EXIT_TRIPPED
    r0, t0 = cold_resistance(cfg)
    write_curve_csv(args.out, curve, [f"precess coil heating curve, rig {cfg.name!r}",
                                      f"resistance method: R0 {r0:.5g} ohm at {t0:g} C, copper"])
    print(f"wrote {curve.times_s.size} samples to {args.out}: peak {np.nanmax(curve.temperature_c):.1f} C")
    return 0


def _disagreement(curve: HeatingCurve) -> str | None:
    if curve.thermistor_c is None:
        return None
    both = np.isfinite(curve.thermistor_c) & np.isfinite(curve.temperature_c)
    if not both.any():
        return None
    diff = curve.temperature_c[both] - curve.thermistor_c[both]
    return f"resistance method minus thermistor: mean {np.mean(diff):+.2f} K, largest {diff[np.argmax(abs(diff))]:+.2f} K"


def run_identify(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    curve = read_curve_csv(args.curve)
    r0, t0 = cold_resistance(loaded.config)
    r20 = expected_resistance_ohm(20.0, r0, t0)
    ambient = args.ambient_c if args.ambient_c is not None else float(curve.temperature_c[np.isfinite(curve.temperature_c)][0])
    one, two, chosen = identify(curve, r20, ambient)
    summary = {"nodes": chosen.nodes, "parameters": chosen.parameters, "rms_k": chosen.rms_k,
               "one_node": {"parameters": one.parameters, "rms_k": one.rms_k, "bic": one.bic},
               "two_node": {"parameters": two.parameters, "rms_k": two.rms_k, "bic": two.bic},
               "ambient_c": ambient, "samples": int(curve.times_s.size)}
    disagreement = _disagreement(curve)
    if args.json:
        print(to_json(summary | {"sensors": disagreement}))
        return 0
    print(f"{curve.times_s.size} samples, ambient {ambient:.2f} C, R20 {r20:.4g} ohm")
    for fit in (one, two):
        params = ", ".join(f"{k} {v:.4g}" for k, v in fit.parameters.items())
        print(f"  {fit.nodes}-node: rms {fit.rms_k:.3f} K, BIC {fit.bic:.1f}: {params}")
    why = "it lowers BIC by more than 10" if chosen.nodes == 2 else "a second node does not lower BIC by more than 10"
    print(f"use the {chosen.nodes}-node model ({why}); in the rig file's [coil] table:")
    keys = dict(chosen.parameters)
    if chosen.nodes == 1:
        keys["former_heat_capacity_j_per_k"] = 0.0
    for k, v in keys.items():
        print(f"  {k} = {v:.4g}")
    if disagreement:
        print(disagreement)
    return 0


def run_predict(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    _, timeline = load_and_compile(args.sequence, loaded, args.shots)
    prediction = predict_run_temperature(timeline, loaded.config, args.start_c)
    limit = loaded.config.limits.max_coil_temperature_c
    if args.csv:
        write_curve_csv(args.csv, HeatingCurve(prediction.times_s, prediction.current_a, prediction.winding_c),
                        [f"predicted coil temperature for {timeline.sequence_name!r} on {loaded.config.name!r}"])
    verdict = "within" if prediction.peak_c <= limit else f"{prediction.peak_c - limit:.1f} K OVER"
    print(f"predicted coil temperature: start {prediction.winding_c[0]:.1f} C, end {prediction.winding_c[-1]:.1f} C, "
          f"peak {prediction.peak_c:.1f} C at {prediction.peak_at_s:.1f} s ({verdict} the {limit:g} C limit); "
          f"{prediction.times_s.size} points")
    return 0 if prediction.peak_c <= limit else 5
