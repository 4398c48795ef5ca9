"""Helpers shared by subcommands: loading a rig and a sequence, the clock, the config snapshot."""

from __future__ import annotations

import argparse
import contextlib
import dataclasses
import json
import math
import sys
from pathlib import Path
from typing import Any, Callable, Iterator

from controller.clock import Clock, VirtualClock, WallClock
from controller.config.loader import LoadedRig, load_rig
from controller.config.schema import RigConfig
from controller.physics.circuit import flyback_energy_j
from controller.rig import Rig, build_rig
from controller.rigmodel import coil_model
from controller.runner import predicted_larmor_hz, prepare_run
from controller.sequences.timeline import Timeline
from controller.store import Store

SIMULATED_NOTE = "simulated rig: nothing is energised"
REAL_RIG_CAUTION = ("CAUTION: this run energises a real coil (up to {current:g} A, {energy:.2g} J stored). "
                    "Keep clear of the coil and its leads; see safety.md.")


def real_rig_caution(cfg: RigConfig, max_current_a: float) -> str:
    """The short caution shown before a real (non-simulated) coil is energised, with the limits in force."""
    energy_j = flyback_energy_j(coil_model(cfg.coil).inductance_h, max_current_a)
    lim, sup = cfg.limits, cfg.supervisor
    return "\n".join([
        REAL_RIG_CAUTION.format(current=max_current_a, energy=energy_j),
        f"  The stored energy returns at switch-off (clamp {cfg.coil.clamp_voltage_v:g} V). The coil gets hot and its"
        " field is strong close by: no pacemakers, tools or cards near it.",
        f"  Limits in force: {lim.max_current_a:g} A, {lim.max_coil_temperature_c:g} C coil "
        f"(insulation class {cfg.coil.insulation_class}), duty {lim.max_duty_cycle:.0%} over {lim.duty_window_s:g} s, "
        f"{lim.max_flyback_energy_j:g} J flyback, supply limit {sup.supply_compliance_v:g} V.",
        "  Ctrl-C stops and switches the coil off. Read safety.md; local electrical codes come first.",
    ])


def whole_number_at_least(minimum: int, what: str = "value", note: str = "") -> Callable[[str], int]:
    """An argparse type: a whole number >= minimum; `note` follows the error (e.g. how things count)."""

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{what} {text!r} is not a whole number{note}") from None
        if value < minimum:
            raise argparse.ArgumentTypeError(f"{what} {value} is not allowed; must be at least {minimum}{note}")
        return value

    parse.__name__ = f"whole number >= {minimum}"
    return parse


positive_int = whole_number_at_least(1)


def make_clock(loaded: LoadedRig, realtime: bool = False) -> Clock:
    if loaded.config.simulator is not None:
        return VirtualClock(pace=1.0 if realtime else 0.0)
    return WallClock()


@contextlib.contextmanager
def existing_store(path: str | None) -> Iterator[Store | None]:
    """The store at path if that file exists (for looking up the last measurement), else None; creates nothing."""
    if not path or not Path(path).exists():
        yield None
        return
    with Store(path) as store:
        yield store


def refused(timeline: Timeline, cfg: RigConfig) -> bool:
    """Print every limit violation as `precess: refused: ...` on stderr; True if there was any."""
    from controller.checks import check_all

    violations = check_all(timeline, cfg)
    for v in violations:
        print(f"precess: refused: {v}", file=sys.stderr)
    return bool(violations)


def load_and_compile(sequence_path: str, loaded: LoadedRig, shots: int | None,
                     store: Store | None = None) -> tuple[Any, Timeline]:
    """The spec and its timeline; the store (if any) supplies the last measured Larmor frequency."""
    prepared = prepare_run(sequence_path, loaded, shots=shots, store=store)
    return prepared.spec, prepared.timeline


def config_snapshot(loaded: LoadedRig, spec: Any, sequence_path: str) -> dict[str, Any]:
    snap: dict[str, Any] = {"rig_file": loaded.path, "rig": dataclasses.asdict(loaded.config),
                            "sequence_file": sequence_path, "sequence": dataclasses.asdict(spec)}
    if loaded.site is not None:
        snap["site"] = dataclasses.asdict(loaded.site)
    if loaded.sample is not None:
        snap["sample"] = dataclasses.asdict(loaded.sample)
    return snap


def open_rig(loaded: LoadedRig, clock: Clock) -> Rig:
    return build_rig(loaded, clock)


def to_json(obj: dict[str, Any]) -> str:
    def clean(v: Any) -> Any:
        if isinstance(v, float) and not math.isfinite(v):
            return None
        if isinstance(v, dict):
            return {k: clean(x) for k, x in v.items()}
        if isinstance(v, (list, tuple)):
            return [clean(x) for x in v]
        return v
    return json.dumps(clean(obj), indent=2, sort_keys=False)


__all__ = ["existing_store", "refused", "load_rig", "positive_int", "make_clock", "load_and_compile", "config_snapshot", "open_rig", "to_json",
           "predicted_larmor_hz"]
