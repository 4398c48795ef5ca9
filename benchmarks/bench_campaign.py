"""A long simulated campaign: time and memory per shot over 10 000 shots.

Printed, not asserted.  The campaign service runs a schedule of short FIDs (0.1 s polarise,
0.1 s acquisition, so 10 000 shots take minutes) on the simulated Heron-2 rig in virtual
time, writing to a real store with a heartbeat after every shot.  Baselines from the same run:
  time per shot        vs the bare engine running the same timeline with no store
  store write per shot vs writing the same bytes to a plain file with fsync
  memory               resident size every 1 000 shots vs after the first 1 000 (flat = 1.0)

Usage: python -m benchmarks.bench_campaign [N_SHOTS]
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path

from controller.campaign.service import CampaignService
from controller.clock import VirtualClock
from controller.config.loader import load_rig
from controller.config.schedule import load_schedule
from controller.engine import Engine
from controller.records import ShotAcquired
from controller.rig import build_rig
from controller.runner import prepare_run
from controller.store import Store
from controller.supervisor.latch import TripLatch

ROOT = Path(__file__).resolve().parent.parent
START_S = 1_782_043_200.0
SHOTS_PER_RUN = 50
SEQUENCE = (f'name = "bench-fid"\nkind = "fid"\nshots = {SHOTS_PER_RUN}\nrecovery_s = 0.02\n'
            '[polarise]\ncurrent_a = 2.0\nduration_s = 0.1\n[receive]\ndead_time_s = 0.015\nacquire_s = 0.1\n')


def rss_mb() -> float:
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 1e6


def bare_engine_s_per_shot(folder: Path, shots: int = 200) -> float:
    loaded = load_rig(ROOT / "configs" / "rigs" / "demo-sim.toml")
    clock = VirtualClock(start_epoch_s=START_S)
    prepared = prepare_run(str(folder / "fid.toml"), loaded)
    engine = Engine(build_rig(loaded, clock), clock)
    t0 = time.perf_counter()
    done = 0
    while done < shots:
        done += engine.run(prepared.timeline, {}).shots_completed
    return (time.perf_counter() - t0) / done


def plain_write_s(nbytes: int, folder: Path, repeat: int = 100) -> float:
    blob = os.urandom(nbytes)
    t0 = time.perf_counter()
    with open(folder / "plain.bin", "wb") as f:
        for _ in range(repeat):
            f.write(blob)
            f.flush()
            os.fsync(f.fileno())
    return (time.perf_counter() - t0) / repeat


def main(n_shots: int = 10_000) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        (folder / "fid.toml").write_text(SEQUENCE)
        runs = max(1, n_shots // SHOTS_PER_RUN)
        (folder / "schedule.toml").write_text(f'name = "bench"\nsequence = "fid.toml"\nevery_s = 10.0\ncount = {runs}\n'
                                              '[campaign]\ndisk_reserve_mb = 200.0\n')
        loaded = load_rig(ROOT / "configs" / "rigs" / "demo-sim.toml")
        clock = VirtualClock(start_epoch_s=START_S)
        rig = build_rig(loaded, clock)
        store = Store(folder / "bench.sqlite")
        writes: list[float] = []
        blob_bytes = [0]
        write = store.write

        def timed_write(record):
            t0 = time.perf_counter()
            write(record)
            if isinstance(record, ShotAcquired):
                writes.append(time.perf_counter() - t0)
                blob_bytes[0] = record.samples.nbytes

        store.write = timed_write  # the engine's critical sink, timed
        service = CampaignService(load_schedule(folder / "schedule.toml"), loaded, store, clock, lambda: rig,
                                  TripLatch(loaded.config.name, folder / "state"))
        memory: list[tuple[int, float, float]] = []
        started = time.perf_counter()

        def sample_memory(prepared):
            def sink(record):
                if isinstance(record, ShotAcquired) and service.shots_this_session % 1000 == 0:
                    memory.append((service.shots_this_session, rss_mb(), time.perf_counter() - started))
            return [sink]

        service.run_sinks = sample_memory
        outcome = service.run()
        total_s = time.perf_counter() - started
        store.close()
        shots = outcome.shots_this_session
        bare = bare_engine_s_per_shot(folder)
        plain = plain_write_s(blob_bytes[0], folder)
        db_mb = (folder / "bench.sqlite").stat().st_size / 1e6

    print(f"campaign: {shots} shots in {runs} runs, {total_s:.0f} s ({outcome.status}); store {db_mb:.0f} MB")
    per_shot = total_s / max(1, shots)
    print(f"  time per shot            {per_shot * 1e3:8.1f} ms   bare engine {bare * 1e3:6.1f} ms   "
          f"ratio {per_shot / bare:5.2f}")
    writes.sort()
    median = writes[len(writes) // 2]
    p99 = writes[int(len(writes) * 0.99)]
    print(f"  store write per shot     {median * 1e3:8.2f} ms (median), {p99 * 1e3:.2f} ms (99th)   "
          f"plain file+fsync {plain * 1e3:6.2f} ms   ratio {median / plain:5.2f}")
    if memory:
        base = memory[0][1]
        print("  shots    RSS MB   vs first   elapsed s")
        for count, rss, elapsed in memory:
            print(f"  {count:6d}  {rss:7.1f}   {rss / base:7.3f}   {elapsed:8.1f}")


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:2]))
