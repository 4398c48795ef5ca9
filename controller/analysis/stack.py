"""Stacking of shots: the mean of the aligned acquisition windows.

Shots recorded on the converter clock and aligned to the switch-off sample are coherent
(the FID's phase is fixed by the switch-off), so their plain mean raises the SNR by sqrt(N).
"""

from __future__ import annotations

import numpy as np


def stack_windows(windows: list[np.ndarray]) -> np.ndarray:
    """Mean of equally long 1-D windows: s = (1/N) sum_i x_i."""
    if not windows:
        raise ValueError("no shots to stack")
    lengths = {w.size for w in windows}
    if len(lengths) != 1:
        raise ValueError(f"shots differ in length: {sorted(lengths)}")
    return np.mean(np.stack(windows), axis=0)
