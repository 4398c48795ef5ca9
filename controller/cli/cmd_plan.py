"""`precess plan site|signal|coil|wires`: answers before going to the field, no hardware touched.

* site:   IGRF field, proton Larmor frequency, nearby mains harmonics, acquisition band;
* signal: the signal budget of a plan file (rig + sequence + site + sample): SNR, field
          precision per shot, shots for a target, ADC headroom, best polarising time;
* coil:   a solenoid's winding, resistance, field, inductance, heating, switch-off, tuning;
* wires:  AWG (ASTM B258) and metric wire tables.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
from types import SimpleNamespace

from controller.config.loader import load_rig, load_sample, load_site
from controller.errors import InputError
from controller.physics.coil import CoilModel
from controller.physics.geomag import parse_date
from controller.physics.thermal import thermal_model_for
from controller.physics.wire import awg_table, metric_table
from controller.planning.coil import CoilDuty, coil_plan
from controller.planning.report import Section, as_json_object, as_text, table_text
from controller.planning.site import DEFAULT_BAND_MARGIN_NT, site_plan
from controller.rigmodel import coil_model

DEFAULT_FIELD_NT = 50000.0
DEFAULTS_WITHOUT_RIG = {"current_a": 2.0, "polarise_s": 2.0, "hot_c": 70.0, "ambient_c": 20.0, "clamp_v": 200.0,
                        "thermal_resistance_k_per_w": 5.0}


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("plan", help="plan a site, a signal budget or a coil (no hardware touched)")
    plan_sub = p.add_subparsers(dest="plan_command", metavar="WHAT")
    plan_sub.required = True

    s = plan_sub.add_parser("site", help="IGRF field, Larmor frequency, mains harmonics and band at a site")
    s.add_argument("--lat", type=float, help="geodetic latitude, degrees north")
    s.add_argument("--lon", type=float, help="longitude, degrees east")
    s.add_argument("--alt-m", type=float, help="height above the ellipsoid in metres (default 0)")
    s.add_argument("--date", help="YYYY-MM-DD (default today, UTC)")
    s.add_argument("--site", help="site file (TOML): position from it, and its field compared with IGRF")
    s.add_argument("--margin-nt", type=float, default=DEFAULT_BAND_MARGIN_NT,
                   help=f"half-width of the acquisition band in nT (default {DEFAULT_BAND_MARGIN_NT:g})")
    s.add_argument("--json", action="store_true", help="print JSON")
    s.set_defaults(handler=run_site)

    g = plan_sub.add_parser("signal", help="signal budget of a plan file: SNR, precision, shots, ADC, timing")
    g.add_argument("plan", help="plan file (TOML) naming a rig, a sequence, a site and a sample")
    g.add_argument("--target-nt", type=float, help="override the plan's target field sd in nT")
    g.add_argument("--json", action="store_true", help="print JSON")
    g.set_defaults(handler=run_signal)

    c = plan_sub.add_parser("coil", help="a solenoid's resistance, field, inductance, heating, switch-off, tuning")
    c.add_argument("--rig", help="take the coil (and its thermal and clamp settings) from a rig file")
    c.add_argument("--turns", type=int, help="number of turns")
    c.add_argument("--radius-mm", type=float, help="inner radius of the winding (the former's outer radius)")
    c.add_argument("--length-mm", type=float, help="winding length")
    c.add_argument("--awg", type=int, help="wire size, AWG (ASTM B258)")
    c.add_argument("--wire-mm", type=float, help="bare copper diameter in mm (instead of --awg)")
    c.add_argument("--insulation-mm", type=float, help="enamel added to the bare diameter (default 0)")
    c.add_argument("--build-mm", type=float, help="radial depth of the winding (default: close-wound layers)")
    c.add_argument("--current-a", type=float, help="polarising current (default: the rig's limit, else 2)")
    c.add_argument("--polarise-s", type=float, help="one polarising pulse (default: the rig's limit, else 2)")
    c.add_argument("--hot-c", type=float, help="hot coil temperature (default: the rig's limit, else 70)")
    c.add_argument("--ambient-c", type=float, help="ambient temperature (default: the rig's, else 20)")
    c.add_argument("--clamp-v", type=float, help="flyback clamp voltage (default: the rig's, else 200)")
    c.add_argument("--heat-capacity-j-per-k", type=float, help="thermal capacity (default: the copper alone)")
    c.add_argument("--thermal-resistance-k-per-w", type=float, help="winding to ambient (default: the rig's, else 5)")
    c.add_argument("--field-nt", type=float, help=f"site field for tuning and switch-off (default {DEFAULT_FIELD_NT:g})")
    c.add_argument("--site", help="site file: take the field from it")
    c.add_argument("--sample-length-mm", type=float,
                   help="sample length for the uniformity (default: a rig's sample filling the former, else half the coil)")
    c.add_argument("--json", action="store_true", help="print JSON")
    c.set_defaults(handler=run_coil)

    w = plan_sub.add_parser("wires", help="wire tables: AWG (ASTM B258) and metric, resistance per km at 20 C")
    w.add_argument("--json", action="store_true", help="print JSON")
    w.set_defaults(handler=run_wires)


def _print(sections: list[Section], as_json: bool) -> int:
    if as_json:
        print(json.dumps(as_json_object(sections), indent=2))
    else:
        print(as_text(sections), end="")
    return 0


# ---- site ---------------------------------------------------------------------------------
def run_site(args: argparse.Namespace) -> int:
    site = load_site(args.site) if args.site else None
    lat = args.lat if args.lat is not None else (site.latitude_deg if site else None)
    lon = args.lon if args.lon is not None else (site.longitude_deg if site else None)
    if lat is None or lon is None:
        raise InputError("plan site needs a position; give --lat DEG and --lon DEG, or --site FILE")
    alt = args.alt_m if args.alt_m is not None else (site.altitude_m if site else 0.0)
    on = parse_date(args.date) if args.date else dt.datetime.now(dt.timezone.utc).date()
    if not args.margin_nt > 0:
        raise InputError(f"--margin-nt {args.margin_nt:g} is not allowed; allowed: more than 0 nT")
    return _print(site_plan(lat, lon, alt, on, args.margin_nt, site, args.site), args.json)


# ---- signal -------------------------------------------------------------------------------
def run_signal(args: argparse.Namespace) -> int:
    from dataclasses import replace

    from controller.planning.planfile import load_plan
    from controller.planning.signal import plan_budgets
    from controller.planning.signal_report import signal_sections

    plan = load_plan(args.plan)
    if args.target_nt is not None:
        if not args.target_nt > 0:
            raise InputError(f"--target-nt {args.target_nt:g} is not allowed; allowed: more than 0 nT")
        plan = replace(plan, config=replace(plan.config, target_field_sd_nt=args.target_nt))
    if not hasattr(plan.sequence, "polarise"):
        raise InputError(f"{plan.sequence_path}: plan signal needs a prepolarised sequence (kind 'fid')")
    try:
        timeline, budget, adc, choice = plan_budgets(plan.rig.config, plan.site, plan.sample, plan.sequence,
                                                     plan.config.snr_bandwidth_hz)
    except ValueError as exc:
        raise InputError(f"{plan.sequence_path}: {exc}") from None
    return _print(signal_sections(plan, timeline, budget, adc, choice), args.json)


# ---- coil ---------------------------------------------------------------------------------
def _coil_from_args(args: argparse.Namespace) -> CoilModel:
    missing = [name for name in ("turns", "radius_mm", "length_mm") if getattr(args, name) is None]
    if missing:
        flags = ", ".join("--" + m.replace("_", "-") for m in missing)
        raise InputError(f"plan coil needs {flags} (or --rig FILE)")
    if (args.awg is None) == (args.wire_mm is None):
        raise InputError("plan coil needs exactly one of --awg N and --wire-mm D")
    return CoilModel(turns=args.turns, radius_m=args.radius_mm * 1e-3, length_m=args.length_mm * 1e-3,
                     wire_awg=args.awg, wire_diameter_m=(args.wire_mm or 0.0) * 1e-3,
                     insulation_m=(args.insulation_mm or 0.0) * 1e-3, build_m=(args.build_mm or 0.0) * 1e-3)


def _pick(value: float | None, from_rig: float | None, key: str) -> float:
    if value is not None:
        return value
    return from_rig if from_rig is not None else DEFAULTS_WITHOUT_RIG[key]


def run_coil(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig) if args.rig else None
    geometry_given = any(getattr(args, n) is not None for n in
                         ("turns", "radius_mm", "length_mm", "awg", "wire_mm", "insulation_mm", "build_mm"))
    if loaded is not None and geometry_given:
        raise InputError("plan coil takes the winding from --rig or from --turns/--radius-mm/...; not both")
    coil = coil_model(loaded.config.coil) if loaded else _coil_from_args(args)
    cfg = loaded.config if loaded else None
    current = _pick(args.current_a, cfg.limits.max_current_a if cfg else None, "current_a")
    polarise = _pick(args.polarise_s, cfg.limits.max_polarise_s if cfg else None, "polarise_s")
    hot = _pick(args.hot_c, cfg.limits.max_coil_temperature_c if cfg else None, "hot_c")
    ambient = _pick(args.ambient_c, cfg.coil.ambient_c if cfg else None, "ambient_c")
    clamp = _pick(args.clamp_v, cfg.coil.clamp_voltage_v if cfg else None, "clamp_v")
    r_th = _pick(args.thermal_resistance_k_per_w, cfg.coil.thermal_resistance_k_per_w if cfg else None,
                 "thermal_resistance_k_per_w")
    heat_capacity = args.heat_capacity_j_per_k or (cfg.coil.heat_capacity_j_per_k if cfg else 0.0) \
        or coil.heat_capacity_j_per_k
    for name, value in (("--current-a", current), ("--polarise-s", polarise), ("--clamp-v", clamp),
                        ("--thermal-resistance-k-per-w", r_th), ("--heat-capacity-j-per-k", heat_capacity)):
        if not value > 0:
            raise InputError(f"{name} {value:g} is not allowed; allowed: more than 0")
    if not -40 <= ambient < hot <= 250:
        raise InputError(f"temperatures ambient {ambient:g} C and hot {hot:g} C are not allowed; "
                         "allowed: -40 <= ambient < hot <= 250 C")
    site = load_site(args.site) if args.site else (loaded.site if loaded else None)
    field_nt = args.field_nt if args.field_nt is not None else (site.field_nt if site else DEFAULT_FIELD_NT)
    if not 1000 <= field_nt <= 100000:
        raise InputError(f"--field-nt {field_nt:g} is not allowed; allowed: 1000 to 100000 nT")
    sample_length = _sample_length_m(args, coil, loaded)
    # the rig's own thermal model (two-node when its [coil] gives a former), with the overrides
    thermal_inputs = SimpleNamespace(
        heat_capacity_j_per_k=heat_capacity, thermal_resistance_k_per_w=r_th, ambient_c=ambient,
        former_heat_capacity_j_per_k=cfg.coil.former_heat_capacity_j_per_k if cfg else 0.0,
        winding_to_former_k_per_w=cfg.coil.winding_to_former_k_per_w if cfg else 1.0)
    thermal = thermal_model_for(thermal_inputs, coil)
    duty = CoilDuty(current_a=current, polarise_s=polarise, hot_c=hot, clamp_voltage_v=clamp,
                    earth_field_nt=field_nt, sample_length_m=sample_length, thermal=thermal)
    return _print(coil_plan(coil, duty), args.json)


def _sample_length_m(args: argparse.Namespace, coil: CoilModel, loaded) -> float:
    if args.sample_length_mm is not None:
        if not 0 < args.sample_length_mm <= 10 * coil.length_m * 1e3:
            raise InputError(f"--sample-length-mm {args.sample_length_mm:g} is not allowed; allowed: more than 0 "
                             "and at most ten coil lengths")
        return args.sample_length_mm * 1e-3
    if loaded is not None and loaded.sample is not None:
        filled = loaded.sample.volume_l * 1e-3 / (math.pi * coil.radius_m**2)
        return min(coil.length_m, filled)
    return coil.length_m / 2.0


# ---- wires --------------------------------------------------------------------------------
WIRE_COLUMNS = [("wire", "wire", ""), ("diameter_mm", "bare mm", ".4f"), ("area_mm2", "area mm2", ".4f"),
                ("ohm_per_km_20c", "ohm/km 20C", ".2f"), ("mass_g_per_m", "g/m", ".3f")]


def run_wires(args: argparse.Namespace) -> int:
    awg = [w.as_dict() for w in awg_table()]
    metric = [w.as_dict() for w in metric_table()]
    if args.json:
        print(json.dumps({"awg": awg, "metric": metric}, indent=2))
        return 0
    print("AWG (ASTM B258: d = 0.127 mm x 92^((36 - n)/39)); copper 1/58 ohm mm2/m at 20 C (IEC 60028)")
    print(table_text(WIRE_COLUMNS, awg))
    print("Metric enamelled winding wire, nominal bare diameters (R20 series)")
    print(table_text(WIRE_COLUMNS, metric), end="")
    return 0
