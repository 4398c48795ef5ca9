"""Read TOML files into the frozen configuration dataclasses."""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from controller.config.hardware import check_hardware
from controller.config.schema import FidSequence, RigConfig, SampleConfig, SiteConfig
from controller.config.sequences import (
    CpmgSequence, EchoSequence, NoiseSequence, NutationSequence, T1EarthSequence, T1PolariseSequence,
)
from controller.config.strict import build
from controller.errors import ConfigError, InputError

SEQUENCE_KINDS: dict[str, type] = {
    "fid": FidSequence, "echo": EchoSequence, "cpmg": CpmgSequence, "t1-polarise": T1PolariseSequence,
    "t1-earth": T1EarthSequence, "nutation": NutationSequence, "noise": NoiseSequence,
}


def read_toml(path: str | Path) -> dict[str, Any]:
    """Parse a TOML file; a missing or malformed file is a ConfigError naming it."""
    p = Path(path)
    try:
        text = p.read_bytes()
    except FileNotFoundError:
        raise ConfigError(str(p), "", "file not found") from None
    except IsADirectoryError:
        raise ConfigError(str(p), "", "is a directory, not a TOML file") from None
    except OSError as exc:
        raise ConfigError(str(p), "", f"cannot be read ({exc.strerror})") from None
    try:
        return tomllib.loads(text.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(str(p), "", "is not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(str(p), "", f"is not valid TOML ({exc})") from None


def load_site(path: str | Path) -> SiteConfig:
    return build(SiteConfig, read_toml(path), str(path))


def load_sample(path: str | Path) -> SampleConfig:
    sample = build(SampleConfig, read_toml(path), str(path))
    if sample.t2_s > sample.t1_s:
        raise ConfigError(str(path), "t2_s", f"{sample.t2_s!r} exceeds t1_s = {sample.t1_s}; allowed: T2 <= T1")
    if sample.t1_earth_s is not None and sample.t2_s > sample.t1_earth_s:
        raise ConfigError(str(path), "t2_s", f"{sample.t2_s!r} exceeds t1_earth_s = {sample.t1_earth_s}; "
                          "allowed: T2 <= T1")
    return sample


@dataclass(frozen=True)
class LoadedRig:
    """A rig with, for the simulator, the site and sample it simulates; path is the rig file."""

    config: RigConfig
    path: str
    site: SiteConfig | None
    sample: SampleConfig | None


def load_rig(path: str | Path) -> LoadedRig:
    """Load a rig file and, for a simulated rig, the site and sample files it names."""
    rig = build(RigConfig, read_toml(path), str(path))
    _check_coil_winding(rig, str(path))
    check_hardware(str(path), rig)
    site = sample = None
    if rig.simulator is not None:
        base = Path(path).parent
        site = load_site(base / rig.simulator.site)
        sample = load_sample(base / rig.simulator.sample)
    elif "simulated" in (rig.transceiver.driver, rig.supply.driver):
        raise ConfigError(str(path), "simulator", "missing; a rig with simulated drivers needs a [simulator] table")
    return LoadedRig(config=rig, path=str(path), site=site, sample=sample)


def _check_coil_winding(rig: RigConfig, file: str) -> None:
    """The wire is given once (AWG or bare diameter) and fits the winding length."""
    from controller.rigmodel import coil_model

    try:
        coil_model(rig.coil)
    except InputError as exc:
        raise ConfigError(file, "coil", str(exc)) from None


def load_sequence(path: str | Path) -> Any:
    """Load a sequence spec; its `kind` picks the dataclass."""
    data = read_toml(path)
    kind = data.get("kind", "fid")
    if kind not in SEQUENCE_KINDS:
        allowed = ", ".join(repr(k) for k in SEQUENCE_KINDS)
        raise ConfigError(str(path), "kind", f"{kind!r} is not a known sequence; allowed: {allowed}")
    return build(SEQUENCE_KINDS[kind], data, str(path))


def with_shots(sequence: Any, shots: int) -> Any:
    """Return the sequence with its shot count replaced (for --shots)."""
    return replace(sequence, shots=shots)
