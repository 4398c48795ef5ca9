"""Output-to-input latency of a transceiver, measured through a loopback (pure parts and the file).

A linear chirp is played on one output, recorded on an input wired back to it, and the
delay is the lag of the cross-correlation peak.  A chirp's autocorrelation has one narrow
peak, so the lag is found to the sample even with noise and AC coupling.  The result is
kept in a small TOML file beside the rig file and stored with every run.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from controller.config.loader import read_toml
from controller.errors import ConfigError

CHIRP_S = 0.05
CHIRP_BAND_HZ = (1000.0, 10000.0)


def chirp(sample_rate_hz: float, duration_s: float = CHIRP_S, band_hz: tuple[float, float] = CHIRP_BAND_HZ,
          amplitude: float = 0.5) -> np.ndarray:
    """Linear chirp with a Hann taper: x = A w(t) sin(2 pi (f0 t + (f1 - f0) t^2 / (2 T)))."""
    n = int(round(duration_s * sample_rate_hz))
    t = np.arange(n) / sample_rate_hz
    f0, f1 = band_hz
    phase = 2 * np.pi * (f0 * t + (f1 - f0) * t**2 / (2 * duration_s))
    return amplitude * np.hanning(n) * np.sin(phase)


def measure_latency_samples(sent: np.ndarray, received: np.ndarray) -> tuple[int, float]:
    """Lag (samples) of `sent` inside `received` and the normalised peak height (0..1).

    Cross-correlation r[k] = sum_n received[n + k] sent[n], computed by FFT; the peak height
    is r[k] / (|sent| |received[k:k+N]|), 1 for a perfect copy.
    """
    x = np.asarray(sent, dtype=float)
    y = np.asarray(received, dtype=float)
    if y.size < x.size:
        raise ValueError("the recording is shorter than the test signal")
    size = 1 << int(np.ceil(np.log2(x.size + y.size)))
    r = np.fft.irfft(np.fft.rfft(y, size) * np.conj(np.fft.rfft(x, size)), size)[: y.size - x.size + 1]
    lag = int(np.argmax(np.abs(r)))
    window = y[lag:lag + x.size]
    norm = float(np.linalg.norm(x) * np.linalg.norm(window))
    return lag, float(abs(r[lag]) / norm) if norm > 0 else 0.0


@dataclass(frozen=True)
class LatencyCalibration:
    latency_samples: int
    sample_rate_hz: float
    device: str
    measured_at: str
    correlation: float

    def as_dict(self) -> dict[str, object]:
        return {"latency_samples": self.latency_samples, "sample_rate_hz": self.sample_rate_hz,
                "device": self.device, "measured_at": self.measured_at, "correlation": self.correlation}


def now_iso() -> str:
    return dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def write_calibration(path: str | Path, cal: LatencyCalibration) -> None:
    lines = ["# Loopback latency written by `precess rig calibrate`; do not edit by hand.",
             f"latency_samples = {cal.latency_samples}", f"sample_rate_hz = {cal.sample_rate_hz:.1f}",
             f"device = {cal.device!r}".replace("'", '"'), f'measured_at = "{cal.measured_at}"',
             f"correlation = {cal.correlation:.4f}"]
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


def read_calibration(path: str | Path, sample_rate_hz: float) -> LatencyCalibration | None:
    """The calibration in `path`, or None when there is no file; a file for another rate is an error."""
    if not Path(path).exists():
        return None
    data = read_toml(path)
    try:
        cal = LatencyCalibration(int(data["latency_samples"]), float(data["sample_rate_hz"]), str(data["device"]),
                                 str(data["measured_at"]), float(data["correlation"]))
    except (KeyError, TypeError, ValueError) as exc:
        raise ConfigError(str(path), "", f"is not a latency calibration ({exc}); run `precess rig calibrate` again") from None
    if cal.sample_rate_hz != sample_rate_hz:
        raise ConfigError(str(path), "sample_rate_hz", f"{cal.sample_rate_hz:g} Hz, but the rig runs at "
                                                       f"{sample_rate_hz:g} Hz; run `precess rig calibrate` again")
    if cal.latency_samples < 0:
        raise ConfigError(str(path), "latency_samples", f"{cal.latency_samples} is negative; allowed: 0 or more")
    return cal
