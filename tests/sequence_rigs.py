"""Simulated rigs and specs for the sequence tests (the invented Heron-2 rig, with changes)."""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Any

from controller.config.loader import SEQUENCE_KINDS, LoadedRig, load_rig
from controller.config.strict import build
from controller.dryrun import DryRun, dry_run
from controller.runner import analysis_context, predicted_larmor_hz
from controller.analysis.by_kind import analyse_run
from controller.sequences.compile import compile_sequence

ROOT = Path(__file__).resolve().parent.parent
DEMO_RIG = ROOT / "configs" / "rigs" / "demo-sim.toml"
START_EPOCH_S = 1_900_000_000.0  # a fixed virtual start, so every run is reproducible


def rig(*, site: dict[str, Any] | None = None, sample: dict[str, Any] | None = None,
        simulator: dict[str, Any] | None = None, receive: dict[str, Any] | None = None,
        limits: dict[str, Any] | None = None) -> LoadedRig:
    """The demo rig with some values replaced."""
    loaded = load_rig(DEMO_RIG)
    cfg = loaded.config
    cfg = dataclasses.replace(cfg, simulator=dataclasses.replace(cfg.simulator, **(simulator or {})),
                              receive=dataclasses.replace(cfg.receive, **(receive or {})),
                              limits=dataclasses.replace(cfg.limits, **(limits or {})))
    return dataclasses.replace(loaded, config=cfg, site=dataclasses.replace(loaded.site, **(site or {})),
                               sample=dataclasses.replace(loaded.sample, **(sample or {})))


def spec(data: dict[str, Any]) -> Any:
    """A sequence spec built strictly from a dict, as from TOML."""
    return build(SEQUENCE_KINDS[data["kind"]], data, "<test>")


def run_and_analyse(data: dict[str, Any], loaded: LoadedRig, larmor_hz: float | None = None) -> tuple[dict, DryRun]:
    """Compile, run on the simulated rig (virtual clock), analyse; return (result, dry run)."""
    s = spec(data)
    f = larmor_hz if larmor_hz is not None else predicted_larmor_hz(loaded)
    timeline = compile_sequence(s, loaded.config.transceiver.sample_rate_hz, f)
    run = dry_run(timeline, loaded, START_EPOCH_S)
    assert run.outcome.exit_status == "completed", run.outcome.reason
    return analyse_run(timeline, s, run.shots, analysis_context(loaded)), run


POLARISE = {"current_a": 2.0, "duration_s": 2.0}
ADIABATIC = {"ramp_s": 0.4, "shape": "linear"}
TWO_STEP = {"excite_deg": [0.0, 180.0], "receiver_deg": [0.0, 180.0]}
