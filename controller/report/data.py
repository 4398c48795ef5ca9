"""What a report shows, gathered from the store: readings, coil temperature, trips, gaps and
the noise spectrum of a few shots spread over the selection.

Gaps are the recorded ones (written when a campaign resumed) and those seen in the readings:
a pause longer than GAP_FACTOR times the median spacing of the readings.

Noise spectrum: Welch's averaged periodogram (Welch, IEEE Trans. AU-15:70, 1967; Hann
window, 50 % overlap, scipy.signal.welch) of each channel's acquisition window, averaged over
up to NOISE_SHOTS shots, as an amplitude spectral density sqrt(PSD) referred to the coil by
dividing by the receive gain (nV/sqrt(Hz) at the coil).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.signal import welch

from controller.store import Store
from controller.store_queries import Selection, measurements, recorded_gaps, run_ids, status_series, trips

GAP_FACTOR = 3.0
NOISE_SHOTS = 16
NOISE_SEGMENT_SAMPLES = 8192
MAX_STATUS_POINTS = 20000


@dataclass
class NoiseSpectrum:
    frequency_hz: np.ndarray
    asd_nv_per_rthz: dict[str, np.ndarray]  # channel name -> ASD referred to the coil
    shots: int


@dataclass
class ReportData:
    selection: Selection
    store_path: str
    runs: list[dict[str, Any]]
    readings: dict[str, np.ndarray]
    temperature_at_s: np.ndarray
    temperature_c: np.ndarray
    temperature_limit_c: float | None
    trips: list[dict[str, Any]]
    gaps: list[dict[str, Any]]
    noise: NoiseSpectrum | None
    shots_stored: int = 0
    shots_compacted: int = 0
    shots_bad: int = 0
    notes: list[str] = field(default_factory=list)

    @property
    def time_span_s(self) -> tuple[float, float] | None:
        times = [t for t in (self.readings["at_s"].tolist() + self.temperature_at_s.tolist()) if np.isfinite(t)]
        times += [t["at_s"] for t in self.trips] + [g["start_s"] for g in self.gaps] + [g["end_s"] for g in self.gaps]
        return (min(times), max(times)) if times else None


def detected_gaps(at_s: np.ndarray, factor: float = GAP_FACTOR) -> list[dict[str, Any]]:
    """Pauses between consecutive readings longer than factor x the median spacing."""
    t = np.sort(np.asarray(at_s, dtype=float))
    if t.size < 3:
        return []
    spacing = np.diff(t)
    cadence = float(np.median(spacing))
    limit = factor * cadence
    return [{"run_id": None, "start_s": float(t[i]), "end_s": float(t[i + 1]),
             "reason": f"no reading for {spacing[i]:.0f} s (usual spacing {cadence:.1f} s)"}
            for i in np.flatnonzero(spacing > limit)]


def _decimate(t: np.ndarray, v: np.ndarray, max_points: int) -> tuple[np.ndarray, np.ndarray]:
    step = max(1, int(np.ceil(t.size / max_points)))
    return t[::step], v[::step]


def noise_spectrum(store: Store, sel: Selection, runs: list[str], gain: float) -> NoiseSpectrum | None:
    """Welch ASD of the acquisition windows of up to NOISE_SHOTS shots spread evenly over the selection."""
    where, params = sel.where("started_at_s")
    marks = ", ".join("?" * len(runs))
    keys = store.db.execute(f"SELECT run_id, started_at_s FROM shots WHERE {where} AND samples IS NOT NULL "
                            f"AND bad = 0 AND run_id IN ({marks}) ORDER BY started_at_s",
                            params + runs).fetchall() if runs else []
    if not keys:
        return None
    picks = [keys[i] for i in np.unique(np.linspace(0, len(keys) - 1, min(NOISE_SHOTS, len(keys))).astype(int))]
    sums: dict[str, np.ndarray] = {}
    freqs, count = None, 0
    for run_id, started in picks:
        for shot in store.shots(run_id, started, started):
            window = shot.samples[:, shot.acquire_start_sample:shot.acquire_start_sample + shot.acquire_samples]
            nper = min(NOISE_SEGMENT_SAMPLES, window.shape[1])
            freqs, psd = welch(window.astype(float), fs=shot.sample_rate_hz, nperseg=nper, axis=-1)
            for name, row in zip(shot.channel_names, psd):
                sums[name] = sums.get(name, 0.0) + row
            count += 1
    if not count:
        return None
    asd = {name: np.sqrt(total / count) / gain * 1e9 for name, total in sums.items()}
    return NoiseSpectrum(frequency_hz=freqs, asd_nv_per_rthz=asd, shots=count)


def gather(store: Store, sel: Selection) -> ReportData:
    runs = [r for r in store.runs() if r["run_id"] in set(run_ids(store, sel))]
    ids = [r["run_id"] for r in runs]
    readings = measurements(store, sel)
    t_temp, temp = _decimate(*status_series(store, sel, "coil_temperature_c"), MAX_STATUS_POINTS)
    config = store.run(ids[0])["config"] if ids else {}
    rig = config.get("rig", {})
    limit = rig.get("limits", {}).get("max_coil_temperature_c")
    gain = float(rig.get("receive", {}).get("gain", 1.0))
    gaps = sorted(recorded_gaps(store, sel) + detected_gaps(readings["at_s"]), key=lambda g: g["start_s"])
    where, params = sel.where("started_at_s")
    marks = ", ".join("?" * len(ids))
    stored, compacted, bad = store.db.execute(
        f"SELECT COUNT(*), COALESCE(SUM(samples IS NULL), 0), COALESCE(SUM(bad), 0) FROM shots "
        f"WHERE {where} AND run_id IN ({marks})", params + ids).fetchone() if ids else (0, 0, 0)
    return ReportData(selection=sel, store_path=str(store.path), runs=runs, readings=readings,
                      temperature_at_s=t_temp, temperature_c=temp, temperature_limit_c=limit,
                      trips=trips(store, sel), gaps=gaps, noise=noise_spectrum(store, sel, ids, gain),
                      shots_stored=int(stored), shots_compacted=int(compacted), shots_bad=int(bad))
