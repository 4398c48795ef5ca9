"""Where shots come from: live records, the store, WAV files.  Each becomes a pipeline ShotData.

`analyse_records(records)` is the one call for engine records and stored shots: it picks the
channel named "signal" and every "reference*" channel and runs the pipeline.

Time zero of a shot is the end of the switch-off ramp or of the last pulse; the engine
records the dead time from there to the acquisition start, so
time_zero_sample = acquire_start_sample - round(dead_time_s fs).
A WAV recording has no such marks: time zero and the first usable sample are its first
sample, and blanking finds where switch-off transients end.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Protocol

import numpy as np

from controller.analysis.pipeline import AnalysisOptions, AnalysisResult, ShotData, analyse_shots
from controller.analysis.wavfile import read_wav
from controller.errors import InputError
from controller.store import Store

SIGNAL_CHANNEL = "signal"
REFERENCE_PREFIX = "reference"


class ShotLike(Protocol):
    """What ShotAcquired and StoredShot have in common."""

    samples: np.ndarray
    sample_rate_hz: float
    channel_names: tuple[str, ...]
    acquire_start_sample: int
    acquire_samples: int
    dead_time_s: float


def shot_from_record(record: ShotLike, full_scale: float | None = None, label: str = "") -> ShotData:
    """A ShotData from a live ShotAcquired or a StoredShot (module docstring for time zero)."""
    fs = float(record.sample_rate_hz)
    return ShotData(samples=np.asarray(record.samples), sample_rate_hz=fs, channel_names=tuple(record.channel_names),
                    time_zero_sample=record.acquire_start_sample - int(round(record.dead_time_s * fs)),
                    first_sample=record.acquire_start_sample, n_samples=record.acquire_samples,
                    full_scale=full_scale, label=label)


def default_channels(channel_names: tuple[str, ...]) -> tuple[int, tuple[int, ...]]:
    """(signal channel, reference channels) by name: "signal" (else 0) and every "reference*"."""
    signal = channel_names.index(SIGNAL_CHANNEL) if SIGNAL_CHANNEL in channel_names else 0
    refs = tuple(i for i, n in enumerate(channel_names) if n.startswith(REFERENCE_PREFIX) and i != signal)
    return signal, refs


def options_for_channels(channel_names: tuple[str, ...], **changes: Any) -> AnalysisOptions:
    """AnalysisOptions with the signal and reference channels chosen by name (default_channels)."""
    signal, refs = default_channels(tuple(channel_names))
    return AnalysisOptions(channel=signal, reference_channels=refs, **changes)


def analyse_records(records: list[ShotLike], full_scale: float | None = None, display: bool = False,
                    **changes: Any) -> AnalysisResult:
    """Live or stored shots (all channels) through the pipeline, channels chosen by name.

    The one call `precess run`, re-measurement and exports share; changes go to AnalysisOptions.
    """
    if not records:
        raise InputError("no shots to analyse")
    shots = [shot_from_record(r, full_scale) for r in records]
    return analyse_shots(shots, options_for_channels(shots[0].channel_names, **changes), display)


def converter_full_scale(config: dict[str, Any]) -> float | None:
    """The rig's ADC full scale in volts from a stored run's config snapshot, if it has one."""
    value = config.get("rig", {}).get("receive", {}).get("adc_full_scale_v")
    return float(value) if isinstance(value, (int, float)) and value > 0 else None


def shots_from_store(db_path: str | Path, run_id: str) -> tuple[list[ShotData], dict[str, Any]]:
    """Every good shot of a stored run, and the run's summary; InputError/StoreError when missing."""
    if not Path(db_path).exists():
        raise InputError(f"{db_path}: no such store (give --db PATH of an existing .sqlite file)")
    with Store(db_path) as store:
        run = store.run(run_id)
        full_scale = converter_full_scale(run["config"])
        shots = [shot_from_record(s, full_scale, f"run {run_id} shot {s.shot_index}")
                 for s in store.shots(run_id) if not s.bad]
    if not shots:
        raise InputError(f"{db_path}: run {run_id} holds no usable shots")
    return shots, run


def shot_from_wav(path: str | Path) -> ShotData:
    """A WAV recording as one shot; channels are named by their index."""
    wav = read_wav(path)
    names = tuple(str(i) for i in range(wav.n_channels))
    return ShotData(samples=wav.samples, sample_rate_hz=wav.sample_rate_hz, channel_names=names,
                    full_scale=wav.full_scale if wav.encoding == "pcm" else None, label=str(path))
