"""Time to analyse 1 s of one channel at 48 kHz (mains hum and an FID), against a plain FFT of the same record.

CPU time of this process (time.process_time) with single-threaded BLAS: the work one core
does, less disturbed by other jobs on the machine than wall-clock time.
"""

from __future__ import annotations

import time

import numpy as np
from scipy.fft import rfft

from controller.analysis.pipeline import ShotData, analyse_shots
from controller.analysis.synthetic import SyntheticSpec, make_record


def median_time_s(func, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.process_time()
        func()
        times.append(time.process_time() - start)
    return float(np.median(times))


def analysis_time(repeats: int = 40) -> dict[str, float]:
    spec = SyntheticSpec(amplitude=3.0, mains_hz=50.003, mains_amplitude=40.0)
    samples = make_record(spec, 1)[:1]
    shot = ShotData(samples, spec.sample_rate_hz, ("signal",))
    analyse_shots([shot])  # warm up imports and caches
    analysis = median_time_s(lambda: analyse_shots([shot]), repeats)
    fft = median_time_s(lambda: rfft(samples[0]), repeats)
    return {"analysis_s": analysis, "fft_s": fft}
