"""The pulse calibration file: B1 per volt, measured by a nutation run, used to size pulses.

A rectangular pulse of length t at amplitude a turns the magnetisation (on resonance) by

    theta = gamma B1_rot t,   B1_rot = b1_rot_t_per_v * a,

B1_rot being the co-rotating half of the linear transmit field (REFERENCE.md, "Relaxation and
switch-off": t90 = pi / (2 gamma B1_rot)).  So a pulse of flip angle theta at amplitude a lasts
t = theta / (gamma b1_rot_t_per_v a).

The file is plain TOML, written atomically (temporary file, then rename) so a crash never
leaves half a calibration.
"""

from __future__ import annotations

import math
import os
import tempfile
from dataclasses import asdict, dataclass
from pathlib import Path

from controller.config.loader import read_toml
from controller.config.strict import build, field
from controller.errors import ConfigError
from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T


@dataclass(frozen=True, kw_only=True)
class PulseCalibration:
    """What a nutation run measured (all amplitudes are transmit volts at the output)."""

    b1_rot_t_per_v: float = field(gt=0.0, help="rotating-frame B1 per volt of transmit amplitude")
    b1_rot_sd_t_per_v: float = field(0.0, min=0.0)
    pulse_90_s: float = field(gt=0.0, help="90 deg pulse length at amplitude_v")
    amplitude_v: float = field(gt=0.0)
    frequency_hz: float = field(gt=0.0, help="transmit frequency of the calibration")
    rig: str = field("")
    run_id: str = field("")
    measured_at_utc: str = field("")

    def duration_for_s(self, flip_deg: float, amplitude_v: float) -> float:
        """Pulse length t = theta / (gamma b1_rot_t_per_v a) for flip_deg at amplitude_v."""
        return math.radians(flip_deg) / (GAMMA_SHIELDED_RAD_PER_S_T * self.b1_rot_t_per_v * amplitude_v)


def load_calibration(path: str | Path) -> PulseCalibration:
    """Read a calibration file; errors name the file and key."""
    return build(PulseCalibration, read_toml(path), str(path))


def _toml_value(value: object) -> str:
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return repr(float(value))


def write_calibration(path: str | Path, calibration: PulseCalibration, comment: str = "") -> None:
    """Write the calibration as TOML, atomically."""
    p = Path(path)
    lines = [f"# {line}" for line in comment.splitlines()] if comment else []
    lines += [f"{key} = {_toml_value(value)}" for key, value in asdict(calibration).items()]
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=p.name, suffix=".tmp", dir=p.parent)
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write("\n".join(lines) + "\n")
        os.replace(tmp, p)
    except OSError as exc:
        raise ConfigError(str(p), "", f"cannot write the calibration ({exc.strerror or exc})") from None
