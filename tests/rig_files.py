"""Small rig and sequence files for tests, written into a temporary folder.

The simulated rig is the Heron-2 twin (configs/rigs/demo-sim.toml) made lighter (few mains
harmonics, short acquisitions) so that a supervised run takes well under a
second; `overrides` change single keys, e.g. {"limits": {"max_duty_cycle": 0.5}}.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

CONFIGS = Path(__file__).resolve().parent.parent / "configs"


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return repr(value)


def to_toml(data: dict[str, Any]) -> str:
    """Flat tables of scalars (enough for rig and sequence files)."""
    top = [f"{k} = {_toml_value(v)}" for k, v in data.items() if not isinstance(v, dict)]
    tables = [f"\n[{k}]\n" + "\n".join(f"{kk} = {_toml_value(vv)}" for kk, vv in v.items())
              for k, v in data.items() if isinstance(v, dict)]
    return "\n".join(top) + "\n" + "\n".join(tables) + "\n"


def _merge(base: dict[str, Any], overrides: dict[str, Any]) -> dict[str, Any]:
    out = dict(base)
    for k, v in overrides.items():
        out[k] = _merge(out.get(k, {}), v) if isinstance(v, dict) else v
    return out


def write_rig(folder: Path, overrides: dict[str, Any] | None = None, name: str = "rig.toml") -> Path:
    data = tomllib.loads((CONFIGS / "rigs" / "demo-sim.toml").read_text())
    data["simulator"].update(site=str(CONFIGS / "sites" / "kestrel-flats.toml"),
                             sample=str(CONFIGS / "samples" / "tap-water-half-litre.toml"),
                             mains_harmonics=5)
    data = _merge(data, overrides or {})
    path = folder / name
    path.write_text(to_toml(data))
    return path


def write_sequence(folder: Path, shots: int = 3, current_a: float = 2.0, polarise_s: float = 2.0,
                   recovery_s: float = 0.5, acquire_s: float = 0.1, name: str = "seq.toml") -> Path:
    data = {"name": "test-fid", "kind": "fid", "shots": shots, "recovery_s": recovery_s,
            "polarise": {"current_a": current_a, "duration_s": polarise_s},
            "switch_off": {"ramp_s": 0.0002, "shape": "linear"},
            "receive": {"dead_time_s": 0.015, "acquire_s": acquire_s}}
    path = folder / name
    path.write_text(to_toml(data))
    return path
