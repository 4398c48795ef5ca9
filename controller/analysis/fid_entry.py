"""The FID pipeline as the sequence analyses call it (controller.analysis.pipeline underneath).

- `fid_shot(plan, shot, full_scale)`: one stored or live shot as a pipeline ShotData, with the
  plan's receiver phase removed from the signal channel (phase cycling) and the reference
  channels kept;
- `fid_options(channel_names, band_hz)`: signal and references by name, the band;
- `analyse_fid_shots(shots, band_hz)`: the `fid` kind's whole-run result (a JSON-ready dict,
  AnalysisResult.as_dict(), FID fields None when nothing is detected);
- `fit_fid(window, fs, time_zero_offset_s, band_hz)`: one (stacked) acquisition window, for
  the series analyses (T1, nutation) that need the FID's frequency and T2*; returns an
  AnalysisResult (frequency_hz, t2star_s, amplitude, ... and `detected`).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from controller.analysis.demodulate import rotate_receiver_phase
from controller.analysis.pipeline import AnalysisOptions, AnalysisResult, ShotData, analyse_shots
from controller.analysis.sources import options_for_channels, shot_from_record
from controller.analysis.shots import ShotLike, receiver_phase_rad
from controller.sequences.timeline import ShotPlan


def fid_shot(plan: ShotPlan, shot: ShotLike, full_scale: float | None = None) -> ShotData:
    """The shot as ShotData, the signal channel rotated by minus the plan's receiver phase."""
    data = shot_from_record(shot, full_scale)
    phase = receiver_phase_rad(plan)
    if phase == 0.0:
        return data
    options = options_for_channels(data.channel_names)
    samples = np.array(data.samples, dtype=float)
    samples[options.channel] = rotate_receiver_phase(samples[options.channel], phase)
    return ShotData(samples, data.sample_rate_hz, data.channel_names, data.time_zero_sample, data.first_sample,
                    data.n_samples, data.full_scale, data.label)


def fid_options(channel_names: tuple[str, ...], band_hz: tuple[float, float]) -> AnalysisOptions:
    return options_for_channels(tuple(channel_names), band_hz=band_hz)


def analyse_fid_shots(shots: list[ShotData], band_hz: tuple[float, float]) -> dict[str, Any]:
    """All shots of a FID run through the pipeline: frequency, field, T2*, amplitude, SNR, detection."""
    if not shots:
        raise ValueError("no usable shots")
    return analyse_shots(shots, fid_options(shots[0].channel_names, band_hz)).as_dict()


def fit_fid(window: np.ndarray, sample_rate_hz: float, time_zero_offset_s: float,
            band_hz: tuple[float, float]) -> AnalysisResult:
    """One acquisition window (its first sample time_zero_offset_s after time zero) through the pipeline."""
    samples = np.asarray(window, dtype=float)[None, :]
    shot = ShotData(samples, sample_rate_hz, ("signal",), time_zero_sample=-int(round(time_zero_offset_s * sample_rate_hz)))
    return analyse_shots([shot], AnalysisOptions(band_hz=band_hz))
