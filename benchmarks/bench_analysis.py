"""FID analysis: accuracy against the Cramer-Rao bound, false alarms, and speed (run by `make bench`).

Single-threaded BLAS where this module is imported before numpy, and CPU time in any case,
so the timing is the work of one core.  `python -m benchmarks.bench_analysis [TRIALS]`
runs it alone.
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import sys  # noqa: E402
import time  # noqa: E402

from benchmarks.accuracy import KINDS, TARGETS, false_alarm_rate, run_case  # noqa: E402
from benchmarks.timing import analysis_time  # noqa: E402

SNRS = (1.0, 3.0, 10.0)
T2STARS_S = (0.1, 1.0)
TIME_TARGET_S = 0.020


def _fmt(value: float | None, width: int = 7) -> str:
    return f"{value:{width}.2f}" if value is not None else " " * (width - 1) + "-"


def main(argv: list[str] | None = None) -> int:
    trials = int(argv[0]) if argv else 60
    started = time.perf_counter()
    print(f"FID analysis vs the Cramer-Rao bound of the full model ({trials} records per row, 1 s at 48 kHz)")
    print("ratio = sd(estimate) / CRB; bias in CRB units; fft = Hann-window FFT peak on the same records")
    print(f"{'noise':10} {'SNR':>5} {'T2* s':>6} {'CRB f Hz':>10} {'ratio f':>8} {'bias f':>7} {'ratio T2*':>9} "
          f"{'bias T2*':>8} {'fft ratio':>10} {'fft bias':>9} {'missed':>6} {'target':>7}")
    print(f"(statistical uncertainty of each ratio: about {100 / (2 * (trials - 1)) ** 0.5:.0f} %)")
    worst: dict[str, float] = {}
    row = 0
    for kind in KINDS:
        for t2 in T2STARS_S:
            for snr in SNRS:
                row += 1
                r = run_case(kind, snr, t2, trials, seed=row)
                ratio = r.get("ratio_f")
                if snr >= 10 or kind != "white":
                    worst[kind] = max(worst.get(kind, 0.0), ratio if ratio is not None else float("inf"))
                print(f"{kind:10} {snr:5.0f} {t2:6.2f} {r['crb_f_hz']:10.2e} {_fmt(ratio, 8)} {_fmt(r.get('bias_f'))} "
                      f"{_fmt(r.get('ratio_t2'), 9)} {_fmt(r.get('bias_t2'), 8)} {r['fft_ratio_f']:10.1f} "
                      f"{r['fft_bias_f']:9.1f} {r['missed']:6d} {TARGETS[kind]:7.2f}", flush=True)
    print()
    for kind in KINDS:
        status = "meets" if worst[kind] <= TARGETS[kind] else "MISSES"
        scope = "SNR >= 10" if kind == "white" else "all SNR"
        print(f"worst ratio f, {kind} ({scope}): {worst[kind]:.2f} (target <= {TARGETS[kind]:.2f}): {status}")
    fa = false_alarm_rate(max(100, 2 * trials))
    print(f"false alarms on noise-only records (white noise + mains hum): {fa:.3f} (design 1e-3)")
    t = analysis_time()
    print(f"time to analyse 1 s at 48 kHz: {t['analysis_s'] * 1e3:.1f} ms (target <= {TIME_TARGET_S * 1e3:.0f} ms, "
          f"ratio {t['analysis_s'] / TIME_TARGET_S:.2f}); one FFT of it: {t['fft_s'] * 1e3:.2f} ms "
          f"(analysis = {t['analysis_s'] / t['fft_s']:.0f} FFTs)")
    print(f"benchmark took {time.perf_counter() - started:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
