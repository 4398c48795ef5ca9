"""The plan file read by `precess plan signal`: which rig, sequence, site and sample, and the goal.

A plan file names the files it combines (paths relative to the plan file) instead of
repeating them, so the numbers a plan predicts come from the very files a run will use:

    name = "Heron-2 at Kestrel Flats"
    rig = "../rigs/demo-sim.toml"              # coil, receive chain, limits, sample rate
    sequence = "../sequences/fid-sudden.toml"  # current, polarising time, ramp, dead time, acquisition
    site = "../sites/kestrel-flats.toml"       # field, gradient; optional for a simulated rig
    sample = "../samples/tap-water-half-litre.toml"  # volume, temperature, T1, T2; optional likewise
    target_field_sd_nt = 0.1                   # precision wanted from a stack of shots
    snr_bandwidth_hz = 100.0                   # bandwidth in which the per-shot SNR is quoted
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from controller.config.loader import LoadedRig, load_rig, load_sample, load_sequence, load_site, read_toml
from controller.config.schema import SampleConfig, SiteConfig
from controller.config.strict import build, field
from controller.errors import ConfigError


@dataclass(frozen=True, kw_only=True)
class PlanConfig:
    name: str = field(help="plan name")
    rig: str = field(help="rig file, relative to the plan file")
    sequence: str = field(help="sequence file, relative to the plan file")
    site: str = field("", help="site file; empty = the site a simulated rig names")
    sample: str = field("", help="sample file; empty = the sample a simulated rig names")
    target_field_sd_nt: float = field(0.1, gt=0.0, max=1000.0, help="field precision wanted from a stack")
    snr_bandwidth_hz: float = field(100.0, gt=0.0, max=100000.0, help="bandwidth for the quoted SNR")


@dataclass(frozen=True)
class LoadedPlan:
    config: PlanConfig
    path: str
    rig: LoadedRig
    sequence: Any
    sequence_path: str
    site: SiteConfig
    sample: SampleConfig


def load_plan(path: str | Path) -> LoadedPlan:
    """Load a plan file and every file it names; a missing site or sample is a ConfigError."""
    config = build(PlanConfig, read_toml(path), str(path))
    base = Path(path).parent
    rig = load_rig(base / config.rig)
    sequence_path = os.path.normpath(base / config.sequence)
    sequence = load_sequence(sequence_path)
    site = load_site(base / config.site) if config.site else rig.site
    sample = load_sample(base / config.sample) if config.sample else rig.sample
    if site is None:
        raise ConfigError(str(path), "site", "missing; the rig names no site, so the plan must")
    if sample is None:
        raise ConfigError(str(path), "sample", "missing; the rig names no sample, so the plan must")
    return LoadedPlan(config=config, path=str(path), rig=rig, sequence=sequence, sequence_path=sequence_path,
                      site=site, sample=sample)
