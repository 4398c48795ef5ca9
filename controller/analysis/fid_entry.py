"""The FID fit as the sequence analyses call it: the one place to switch to a fuller FID pipeline.

Everything outside the `fid` kind that needs a FID's frequency, T2* or amplitude goes
through fit_fid; the `fid` kind's whole-run analysis goes through analyse_fid_windows.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from controller.analysis.fit import DampedSineFit, fit_damped_sine
from controller.analysis.run_analysis import ShotWindow, analyse_shots


def fit_fid(window: np.ndarray, sample_rate_hz: float, time_zero_offset_s: float,
            band_hz: tuple[float, float]) -> DampedSineFit:
    """Fit A exp(-t/T2*) cos(2 pi f t + phi) to one (stacked) acquisition window."""
    return fit_damped_sine(window, sample_rate_hz, time_zero_offset_s, band_hz)


def analyse_fid_windows(windows: list[ShotWindow], band_hz: tuple[float, float]) -> dict[str, Any]:
    """Stack and fit the shots of a FID run: frequency, field, T2*, amplitude, SNR."""
    return analyse_shots(windows, band_hz=band_hz)
