"""How much faster than real time the simulated rig runs each sequence's shots.

For every worked example in configs/sequences/ (one phase cycle's worth of shots): the time
the shots would take on a real rig (the timeline's duration) over the wall time the engine and
simulator need for them.  Target: at least 20x.  A reference workload (a 2^20-point FFT) is
timed in the same run, so a slow machine shows up as a slow reference rather than a slow
simulator.
"""

from __future__ import annotations

import time
from dataclasses import replace
from pathlib import Path

import numpy as np

from controller.config.loader import load_rig
from controller.config.sequences import CpmgSequence
from controller.config.strict import build
from controller.dryrun import dry_run
from controller.runner import predicted_larmor_hz, prepare_run
from controller.sequences.compile import compile_sequence

ROOT = Path(__file__).resolve().parent.parent
TARGET_SPEEDUP = 20.0


def reference_s() -> float:
    x = np.random.default_rng(0).standard_normal(1 << 20)
    start = time.perf_counter()
    for _ in range(5):
        np.fft.rfft(x)
    return (time.perf_counter() - start) / 5


def main() -> None:
    loaded = load_rig(ROOT / "configs" / "rigs" / "demo-sim.toml")
    ref = reference_s()
    print(f"reference workload (2^20-point real FFT): {ref * 1e3:.1f} ms")
    print(f"{'sequence':22} {'shots':>5} {'real s':>8} {'sim s':>7} {'x real time':>11} {'sim / reference':>15}")
    dry_run(prepare_run(str(ROOT / "configs/sequences/fid-sudden.toml"), loaded, shots=1).timeline, loaded)  # warm up
    worst = float("inf")
    for path in sorted((ROOT / "configs" / "sequences").glob("*.toml")):
        prepared = prepare_run(str(path), loaded)
        timeline = prepared.timeline
        steps = max(s.cycle_step for s in timeline.shots) + 1
        points = len({s.series_index for s in timeline.shots})
        shots = timeline.shots[: steps * points]
        timeline = replace(timeline, shots=tuple(replace(s, index=i) for i, s in enumerate(shots)))
        start = time.perf_counter()
        dry_run(timeline, loaded)
        sim_s = time.perf_counter() - start
        speedup = timeline.duration_s / sim_s
        worst = min(worst, speedup)
        print(f"{path.stem:22} {len(shots):5d} {timeline.duration_s:8.1f} {sim_s:7.2f} {speedup:10.0f}x "
              f"{sim_s / ref:15.0f}")
    long_train = build(CpmgSequence, {
        "name": "cpmg-500-echoes", "kind": "cpmg", "polarise": {"current_a": 2.0, "duration_s": 2.0},
        "excite": {"duration_s": 0.0012, "amplitude_v": 2.0}, "refocus": {"duration_s": 0.0024, "amplitude_v": 2.0},
        "echo_spacing_s": 0.02, "echoes": 500, "echo_window_s": 0.005, "receive": {"dead_time_s": 0.005}}, "<bench>")
    timeline = compile_sequence(long_train, loaded.config.transceiver.sample_rate_hz, predicted_larmor_hz(loaded))
    start = time.perf_counter()
    dry_run(timeline, loaded)
    sim_s = time.perf_counter() - start
    worst = min(worst, timeline.duration_s / sim_s)
    print(f"{long_train.name:22} {1:5d} {timeline.duration_s:8.1f} {sim_s:7.2f} {timeline.duration_s / sim_s:10.0f}x "
          f"{sim_s / ref:15.0f}")
    verdict = "meets" if worst >= TARGET_SPEEDUP else "MISSES"
    print(f"slowest: {worst:.0f}x real time; {verdict} the target of {TARGET_SPEEDUP:g}x")


if __name__ == "__main__":
    main()
