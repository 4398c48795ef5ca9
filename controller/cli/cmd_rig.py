"""`precess rig test RIG` (safe self-test) and `precess rig calibrate RIG` (loopback latency)."""

from __future__ import annotations

import argparse

from controller.cli.common import load_rig, make_clock
from controller.errors import InputError
from controller.rig import build_rig, latency_file_for
from controller.rigmodel import coil_model
from controller.selftest import self_test

EXIT_SELF_TEST_FAILED = 3
CURRENT_CAUTION = ("CAUTION: the self-test will put {current:g} A through the coil for {hold:g} s "
                   "({energy:.2g} J stored). Keep clear of the coil and its leads; see safety.md.")
CALIBRATE_NOTE = ("Wire output {output} to input {input} (a cable, no preamp, nothing else connected) "
                  "before calibrating; the test signal is a 50 ms chirp at half scale.")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("rig", help="self-test a rig, or calibrate its loopback latency")
    rig_sub = p.add_subparsers(dest="rig_command", metavar="ACTION")
    rig_sub.required = True
    t = rig_sub.add_parser("test", help="exercise each driver safely (no current unless --current)")
    t.add_argument("rig", help="rig file (TOML)")
    t.add_argument("--current", type=float, metavar="A", help="also drive this current through the coil")
    t.add_argument("--hold", type=float, default=1.0, metavar="S", help="how long to hold --current (default 1 s)")
    t.set_defaults(handler=run_test)
    c = rig_sub.add_parser("calibrate", help="measure the sound card's output->input latency through a loopback")
    c.add_argument("rig", help="rig file (TOML)")
    c.add_argument("--output", type=int, metavar="CH", help="output channel (default: the marker output)")
    c.add_argument("--input", type=int, metavar="CH", help="input channel (default: the first reference input)")
    c.set_defaults(handler=run_calibrate)


def run_test(args: argparse.Namespace) -> int:
    loaded = load_rig(args.rig)
    limits = loaded.config.limits
    if args.current is not None:
        if not 0 < args.current <= limits.max_current_a:
            raise InputError(f"--current {args.current:g} A is outside 0 to {limits.max_current_a:g} A "
                             f"(limits.max_current_a in {args.rig})")
        if not 0 < args.hold <= limits.max_polarise_s:
            raise InputError(f"--hold {args.hold:g} s is outside 0 to {limits.max_polarise_s:g} s "
                             f"(limits.max_polarise_s in {args.rig})")
        energy = 0.5 * coil_model(loaded.config.coil).inductance_h * args.current**2
        print(CURRENT_CAUTION.format(current=args.current, hold=args.hold, energy=energy))
    clock = make_clock(loaded)
    rig = build_rig(loaded, clock)
    try:
        results = self_test(rig, loaded.config.coil, loaded.config.transceiver.sample_rate_hz, args.current,
                            args.hold, clock.sleep)
    finally:
        rig.close()
    print(f"self-test of {loaded.config.name!r} ({args.rig}):")
    for result in results:
        print(f"  {result}")
    failed = [r for r in results if not r.ok]
    print(f"{len(results) - len(failed)} passed, {len(failed)} failed")
    return EXIT_SELF_TEST_FAILED if failed else 0


def run_calibrate(args: argparse.Namespace) -> int:
    from drivers.loopback_calibration import write_calibration
    from drivers.soundcard import SoundCardTransceiver, calibrate_latency

    loaded = load_rig(args.rig)
    sc = loaded.config.transceiver.soundcard
    if sc is None:
        raise InputError(f"{args.rig}: transceiver.driver is {loaded.config.transceiver.driver!r}; "
                         "latency calibration is for 'soundcard' transceivers")
    output = sc.marker_out if args.output is None else args.output
    inputs = sc.reference_in or (sc.signal_in,)
    channel_in = inputs[0] if args.input is None else args.input
    print(CALIBRATE_NOTE.format(output=output, input=channel_in))
    card = SoundCardTransceiver(sc, loaded.config.transceiver.sample_rate_hz, None).open()
    try:
        if not 0 <= output < card.n_out or not 0 <= channel_in < card.n_in:
            raise InputError(f"channels {output} -> {channel_in} are not in the stream "
                             f"({card.n_out} out, {card.n_in} in)")
        cal = calibrate_latency(card, output, channel_in)
    finally:
        card.close()
    path = latency_file_for(loaded)
    write_calibration(path, cal)
    fs = loaded.config.transceiver.sample_rate_hz
    print(f"loopback latency {cal.latency_samples} samples ({cal.latency_samples / fs * 1e3:.3f} ms) on "
          f"{cal.device}, correlation {cal.correlation:.3f}; written to {path}")
    return 0
