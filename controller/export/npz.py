"""NumPy .npz export: the field readings and (optionally) the raw shots, as plain arrays.

Keys: the measurement columns (`at_s`, `field_nt`, ..., `run_id` as text); with samples,
`samples` shaped (n_shots, n_channels, n_samples) float32 volts at the converter and, per
shot, `shot_run_id`, `shot_index`, `shot_started_at_s`, `switch_off_sample`,
`acquire_start_sample`, `acquire_samples`, `dead_time_s`, `bad`, with `sample_rate_hz` and
`channel_names`.  No pickled objects: `numpy.load(path)` opens it with allow_pickle off.
"""

from __future__ import annotations

from pathlib import Path
from typing import Iterable

import numpy as np

from controller.errors import InputError
from controller.store import StoredShot

MAX_SAMPLE_BYTES = 2 * 1024**3


def shot_arrays(shots: Iterable[StoredShot]) -> dict[str, np.ndarray]:
    """Stack shots of one shape into arrays; shots of different shape or rate are an error."""
    shots = list(shots)
    if not shots:
        return {}
    first = shots[0]
    for s in shots:
        if s.samples.shape != first.samples.shape or s.sample_rate_hz != first.sample_rate_hz:
            raise InputError(f"shots differ in shape or rate (run {s.run_id} shot {s.shot_index}: "
                             f"{s.samples.shape} at {s.sample_rate_hz} Hz, first {first.samples.shape} at "
                             f"{first.sample_rate_hz} Hz); export one run at a time")
    return {
        "samples": np.stack([s.samples for s in shots]).astype(np.float32),
        "shot_run_id": np.array([s.run_id for s in shots], dtype=str),
        "shot_index": np.array([s.shot_index for s in shots], dtype=np.int64),
        "shot_started_at_s": np.array([s.started_at_s for s in shots]),
        "switch_off_sample": np.array([s.switch_off_sample for s in shots], dtype=np.int64),
        "acquire_start_sample": np.array([s.acquire_start_sample for s in shots], dtype=np.int64),
        "acquire_samples": np.array([s.acquire_samples for s in shots], dtype=np.int64),
        "dead_time_s": np.array([s.dead_time_s for s in shots]),
        "bad": np.array([s.bad for s in shots]),
        "sample_rate_hz": np.array(first.sample_rate_hz),
        "channel_names": np.array(first.channel_names, dtype=str),
    }


def write_npz(path: str | Path, series: dict[str, np.ndarray], shots: dict[str, np.ndarray]) -> None:
    arrays = {k: (v.astype(str) if v.dtype == object else v) for k, v in series.items()}
    overlap = set(arrays) & set(shots)
    if overlap:
        raise ValueError(f"npz keys clash: {sorted(overlap)}")
    with open(path, "wb") as out:  # a file object: numpy adds no ".npz" to the name
        np.savez(out, **arrays, **shots)
