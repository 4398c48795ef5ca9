"""How much faster than real time the simulated rig runs a FID shot (target: >= 20x).

Baseline in the same run: the shot's own real-time duration (polarise + segment + recovery).
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path

from controller.clock import VirtualClock
from controller.config.loader import load_rig, load_sequence
from controller.engine import Engine
from controller.rig import build_rig
from controller.sequences.compile import compile_sequence

ROOT = Path(__file__).resolve().parent.parent
TARGET_SPEEDUP = 20.0


def measure(sequence: str, shots: int = 4) -> tuple[float, float]:
    loaded = load_rig(ROOT / "configs/rigs/demo-sim.toml")
    clock = VirtualClock(start_epoch_s=1_782_043_200.0)
    rig = build_rig(loaded, clock)
    spec = dataclasses.replace(load_sequence(ROOT / "configs/sequences" / sequence), shots=shots)
    timeline = compile_sequence(spec, loaded.config.transceiver.sample_rate_hz, rig.instrument.larmor_hz())
    engine = Engine(rig, clock)
    start = time.perf_counter()
    engine.run(timeline, {})
    return time.perf_counter() - start, timeline.duration_s


def main() -> None:
    print(f"{'sequence':28} {'simulated s':>12} {'wall s':>8} {'speed-up':>9} {'target':>7}")
    for sequence in ("fid-sudden.toml", "fid-adiabatic-pulse.toml"):
        wall, simulated = measure(sequence)
        speedup = simulated / wall
        verdict = "ok" if speedup >= TARGET_SPEEDUP else "SLOW"
        print(f"{sequence:28} {simulated:12.2f} {wall:8.3f} {speedup:8.1f}x {TARGET_SPEEDUP:6.0f}x {verdict}")


if __name__ == "__main__":
    main()
