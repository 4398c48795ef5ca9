"""`precess analyze`: frequency, field, T2* and SNR of a WAV recording or of a stored run."""

from __future__ import annotations

import argparse
import math
from typing import Any

from controller.analysis.pipeline import DEFAULT_BAND_HZ, AnalysisOptions, ShotData, analyse_shots, gamma_value
from controller.analysis.sources import default_channels, shot_from_wav, shots_from_store
from controller.cli.cmd_runs import DEFAULT_DB
from controller.cli.common import to_json, whole_number_at_least
from controller.errors import InputError
from controller.store import Store


PER_KIND_ANALYSIS = ("echo", "cpmg", "t1-polarise", "t1-earth", "nutation", "noise")


def band(text: str) -> tuple[float, float]:
    """LOW:HIGH in Hz."""
    try:
        low, high = (float(v) for v in text.split(":"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"band {text!r} must be LOW:HIGH in Hz, e.g. 1000:3500") from None
    if not (math.isfinite(low) and math.isfinite(high) and 0 < low < high):
        raise argparse.ArgumentTypeError(f"band {text!r} must satisfy 0 < LOW < HIGH")
    return low, high


channel_number = whole_number_at_least(0, "channel", " (channels count from 0)")


def gamma_choice(text: str) -> str | float:
    if text in ("shielded", "free", "iaga2006"):
        return text
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"gamma {text!r}: allowed are shielded, free, iaga2006 or a value in Hz/nT") from None
    if not (math.isfinite(value) and value > 0):
        raise argparse.ArgumentTypeError(f"gamma {text!r} must be a positive value in Hz/nT")
    return value


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("analyze", help="frequency, field, T2* and SNR of a WAV recording or a stored run",
                       description="Analyse an FID: blanking, despiking, mains-hum model, reference cancellation, "
                                   "joint fit, detection.  Give a WAV file, or --db and --run.  Stored echo, CPMG, "
                                   "T1, nutation and noise runs get their own kind's analysis (--json for every field).")
    p.add_argument("path", nargs="?", help="WAV file (PCM 8/16/24/32-bit or float, any channels)")
    p.add_argument("--db", help=f"store file for --run (default {DEFAULT_DB})")
    p.add_argument("--run", help="run id in the store, or 'latest'")
    p.add_argument("--json", action="store_true", help="print the result as one JSON object")
    p.add_argument("--plot", metavar="OUT.png", help="write a figure: trace, envelope, residual, spectra")
    p.add_argument("--channel", type=channel_number, help="signal channel, from 0 (default: 'signal' or 0)")
    p.add_argument("--ref-channel", type=channel_number, action="append", default=None, metavar="N",
                   help="reference-coil channel (repeatable; stored runs default to their 'reference' channels)")
    p.add_argument("--no-ref", action="store_true", help="use no reference channel")
    p.add_argument("--band", type=band, default=DEFAULT_BAND_HZ, metavar="LOW:HIGH",
                   help="search band in Hz (default 1000:3500, the Earth's-field band)")
    p.add_argument("--mains", choices=("50", "60", "auto"), default="auto", help="mains fundamental (default auto)")
    p.add_argument("--gamma", type=gamma_choice, default="shielded", metavar="shielded|free|iaga2006|VALUE",
                   help="proton gyromagnetic ratio for the field: CODATA 2022 shielded (default), free, "
                        "IAGA (CODATA 2006), or a value in Hz/nT")
    p.set_defaults(handler=run)


def _stored_run(args: argparse.Namespace) -> tuple[str, str, str]:
    """(store path, run id, sequence kind) of --db/--run ('latest' resolved)."""
    from pathlib import Path

    db = args.db or DEFAULT_DB
    run_id = args.run
    if not Path(db).exists():
        raise InputError(f"{db}: no such store (give --db PATH of an existing .sqlite file)")
    with Store(db) as store:
        run_id = store.resolve_run_id(run_id)
        kind = store.run(run_id)["config"].get("sequence", {}).get("kind", "fid")
    return db, run_id, kind


def _load(args: argparse.Namespace, db: str, run_id: str) -> tuple[list[ShotData], str, str]:
    """(shots, title, units) of the WAV file, else of the stored FID run."""
    if args.path:
        return [shot_from_wav(args.path)], args.path, "full scale"
    shots, run = shots_from_store(db, run_id)
    return shots, f"run {run_id} ({run['sequence_name']})", "V"


def options_for(shot: ShotData, args: argparse.Namespace) -> AnalysisOptions:
    signal, refs = default_channels(shot.channel_names) if not args.path else (0, ())
    channel = signal if args.channel is None else args.channel
    if args.no_ref:
        refs = ()
    elif args.ref_channel is not None:
        refs = tuple(args.ref_channel)
    else:
        refs = tuple(r for r in refs if r != channel)
    gamma_value(args.gamma)
    return AnalysisOptions(channel=channel, reference_channels=refs, band_hz=args.band, mains=args.mains,
                           gamma=args.gamma)


def summary_lines(result: dict[str, Any]) -> list[str]:
    lines = []
    if result["detected"]:
        lines.append(f"f = {result['frequency_hz']:.4f} +/- {result['frequency_sd_hz']:.4f} Hz,  "
                     f"B = {result['field_nt']:.2f} +/- {result['field_sd_nt']:.2f} nT "
                     f"(gamma/2pi = {result['gamma_hz_per_nt']:.10g} Hz/nT)")
        lines.append(f"T2* = {result['t2star_s']:.4f} +/- {result['t2star_sd_s']:.4f} s,  "
                     f"amplitude {result['amplitude']:.4g} +/- {result['amplitude_sd']:.2g},  SNR {result['snr']:.1f}")
    else:
        lines.append(f"no FID detected: {result['detection_reason']} (statistic {result['detection_statistic']:.1f}"
                     f" <= threshold {result['detection_threshold']:.1f})")
    mains = (f"mains {result['mains_hz']:.4f} +/- {result['mains_sd_hz']:.4f} Hz" if result["mains_hz"] is not None
             else "no mains hum found")
    lines.append(f"{result['shots']} shot(s) at {result['sample_rate_hz']:g} Hz, dead time "
                 f"{result['dead_time_s'] * 1e3:.1f} ms (blanking: {result['blanking']}), {mains}, "
                 f"{result['spikes_replaced']} spike sample(s) replaced")
    return lines


def run_per_kind(args: argparse.Namespace, db: str, run_id: str) -> int:
    """An echo, CPMG, T1, nutation or noise run: its own kind's analysis (analysis.stored_runs)."""
    from controller.analysis.stored_runs import analyse_stored_run

    if args.plot:
        raise InputError(f"run {run_id}: --plot draws FID analyses only; leave it out for this run's kind")
    result = analyse_stored_run(db, run_id)
    if args.json:
        print(to_json(result))
    else:
        print(f"run {run_id} ({result['sequence_name']}, {result['kind']})")
        print("  " + result["headline"]["text"])
    return 0


def run(args: argparse.Namespace) -> int:
    if args.path and (args.db or args.run):
        raise InputError("give either a WAV file or --db/--run, not both")
    if not args.path and not args.run:
        raise InputError("nothing to analyse: give a WAV file, or --run ID (with --db PATH)")
    db, run_id, kind = _stored_run(args) if not args.path else ("", "", "fid")
    if kind in PER_KIND_ANALYSIS:
        return run_per_kind(args, db, run_id)
    shots, title, units = _load(args, db, run_id)
    options = options_for(shots[0], args)
    result = analyse_shots(shots, options, display=bool(args.plot))
    if args.plot:
        from controller.analysis.plot import plot_analysis

        time_label = "time from the start of the recording (s)" if args.path else "time after switch-off / pulse end (s)"
        plot_analysis(result, args.plot, title, units, time_label)
    data = result.as_dict()
    if args.json:
        print(to_json(data))
    else:
        print(title)
        for line in summary_lines(data):
            print("  " + line)
        if args.plot:
            print(f"  plot written to {args.plot}")
    return 0
