"""Store speed with campaign-sized data: write per shot, queries and exports with 100 000 shots.

Printed, not asserted.  Each time is shown with a baseline measured in the same run:
  write per shot      vs writing the same bytes to a plain file with fsync (the disk's own cost)
  queries             vs the same query with the index switched off (`NOT INDEXED`)
  exports             vs numpy.savetxt of the same columns
The 100 000-shot store uses small synthetic sample blobs (2 x 64 float32) so it builds in
seconds; the per-shot write uses full-size shots (2 channels x 50 400 samples, as a 1.05 s
segment at 48 kHz).

Usage: python -m benchmarks.bench_store [N_SHOTS]
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

from controller.export.from_store import export_csv, export_iaga2002
from controller.records import RunStarted, ShotAcquired
from controller.store import Store
from controller.store_migrations import MEASUREMENT_COLUMNS
from controller.store_maintenance import check_store, compact_samples
from controller.store_queries import Selection, measurements

START_S = 1_782_000_000.0
SHOT_SPACING_S = 3.5
SHOTS_PER_RUN = 100
SITE = {"name": "Kestrel Flats (invented)", "latitude_deg": 47.25, "longitude_deg": 11.5, "altitude_m": 620.0,
        "iaga_code": "KFX"}


def _timed(fn, repeat: int = 1) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def _shot(run_id: str, index: int, samples: np.ndarray) -> ShotAcquired:
    return ShotAcquired(run_id=run_id, shot_index=index, started_at_s=START_S + index * SHOT_SPACING_S,
                        sample_rate_hz=48000.0, channel_names=("signal", "reference"), samples=samples,
                        switch_off_sample=0, acquire_start_sample=720, acquire_samples=48000, dead_time_s=0.015,
                        latency_samples=0)


def write_per_shot(folder: Path, shots: int = 100) -> None:
    samples = np.random.default_rng(1).standard_normal((2, 50400)).astype(np.float32)
    with Store(folder / "write.sqlite") as store:
        store.write(RunStarted("w", START_S, "fid", "fid", shots, 48000.0, {}, "bench", True))
        times = []
        tracemalloc.start()
        for i in range(shots):
            t0 = time.perf_counter()
            store.write(_shot("w", i, samples))
            times.append(time.perf_counter() - t0)
            if i == 9:
                early_peak = tracemalloc.get_traced_memory()[1]
        late_peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    blob = samples.astype("<f4").tobytes()
    base = []
    with open(folder / "plain.bin", "wb") as f:
        for _ in range(shots):
            t0 = time.perf_counter()
            f.write(blob)
            f.flush()
            os.fsync(f.fileno())
            base.append(time.perf_counter() - t0)
    ms, base_ms = 1e3 * float(np.median(times)), 1e3 * float(np.median(base))
    print(f"store write per shot ({len(blob) / 1e3:.0f} kB, synchronous=FULL): median {ms:.2f} ms, "
          f"p95 {1e3 * float(np.percentile(times, 95)):.2f} ms; plain file + fsync {base_ms:.2f} ms "
          f"(ratio {ms / base_ms:.2f})")
    print(f"memory while writing: peak {early_peak / 1e6:.1f} MB after 10 shots, {late_peak / 1e6:.1f} MB after "
          f"{shots} (flat if equal)")


def build_large(path: Path, n_shots: int) -> None:
    """n_shots small shots in runs of SHOTS_PER_RUN, a reading and 5 status rows per shot (bulk insert)."""
    rng = np.random.default_rng(2)
    blob = rng.standard_normal((2, 64)).astype("<f4").tobytes()
    digest = hashlib.sha256(blob).hexdigest()
    names = json.dumps(["signal", "reference"])
    config = json.dumps({"site": SITE, "rig": {"name": "heron-2 (simulated)"}})
    with Store(path) as store:
        db = store.db
        db.execute("BEGIN")
        for r in range(0, n_shots, SHOTS_PER_RUN):
            run_id = f"run{r // SHOTS_PER_RUN:06d}"
            t_run = START_S + r * SHOT_SPACING_S
            db.execute("INSERT INTO runs (run_id, started_at_s, finished_at_s, sequence_name, sequence_kind, "
                       "shots_planned, sample_rate_hz, simulated, software_version, config_json, exit_status, reason, "
                       "shots_completed) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?)",
                       (run_id, t_run, t_run + SHOTS_PER_RUN * SHOT_SPACING_S, "fid", "fid", SHOTS_PER_RUN, 48000.0,
                        1, "bench", config, "completed", "done", SHOTS_PER_RUN))
            idx = np.arange(min(SHOTS_PER_RUN, n_shots - r))
            t = t_run + idx * SHOT_SPACING_S
            db.executemany("INSERT INTO shots (run_id, shot_index, started_at_s, sample_rate_hz, channel_names, "
                           "n_channels, n_samples, samples, sha256, switch_off_sample, acquire_start_sample, "
                           "acquire_samples, dead_time_s, latency_samples, bad, notes) "
                           "VALUES (?,?,?,48000.0,?,2,64,?,?,0,8,48,0.015,0,0,'[]')",
                           [(run_id, int(i), float(ti), names, blob, digest) for i, ti in zip(idx, t)])
            field = 48250.0 + 25 * np.sin(2 * np.pi * t / 86400) + 0.1 * rng.standard_normal(idx.size)
            db.executemany(f"INSERT INTO measurements ({', '.join(MEASUREMENT_COLUMNS)}) "
                           "VALUES (?,?,?,?,1,?,0.1,?,0.004,1.1,0.03,40.0,0.04257638543,'shots',?)", [(run_id, float(ti + 0.5), int(i), int(i), float(b), float(b) * 0.0425763,
                                           float(ti)) for i, ti, b in zip(idx, t, field)])
            db.executemany("INSERT INTO status (run_id, at_s, readings_json) VALUES (?,?,?)",
                           [(run_id, float(ti + k * 0.5), json.dumps({"coil_temperature_c": 20.0 + k}))
                            for ti in t for k in range(5)])
        db.execute("COMMIT")


def queries(path: Path) -> None:
    hour = (START_S + 3 * 86400, START_S + 3 * 86400 + 3600)
    cases = [
        ("readings in one hour", "SELECT COUNT(*) FROM measurements {ni} WHERE at_s BETWEEN ? AND ?", hour),
        ("shots in one hour", "SELECT COUNT(*) FROM shots {ni} WHERE started_at_s BETWEEN ? AND ?", hour),
        ("coil temperature, one hour",
         "SELECT json_extract(readings_json, '$.coil_temperature_c') FROM status {ni} WHERE at_s BETWEEN ? AND ?",
         hour),
        ("last shot of a run", "SELECT MAX(shot_index) FROM shots {ni} WHERE run_id = ?", ("run000500",)),
    ]
    with Store(path) as store:
        for label, sql, params in cases:
            fast = _timed(lambda: store.db.execute(sql.format(ni=""), params).fetchall(), 5)
            slow = _timed(lambda: store.db.execute(sql.format(ni="NOT INDEXED"), params).fetchall(), 2)
            print(f"query {label:28}: {fast * 1e3:8.2f} ms; without index {slow * 1e3:8.1f} ms "
                  f"(speed-up {slow / fast:7.0f}x)")
        t_sel = _timed(lambda: measurements(store, Selection(from_s=hour[0], to_s=hour[1])), 5)
        print(f"measurements() for one hour     : {t_sel * 1e3:8.2f} ms")
        t_runs = _timed(store.runs, 2)
        print(f"runs() listing {len(store.runs())} runs        : {t_runs * 1e3:8.1f} ms")


def exports(path: Path, folder: Path) -> None:
    with Store(path) as store:
        series = measurements(store, Selection())
        n = len(series["at_s"])
        t_csv = _timed(lambda: export_csv(store, Selection(), folder / "r.csv"))
        t_iaga = _timed(lambda: export_iaga2002(store, Selection(), folder / "r.sec", interval_s=1.0))
    table = np.column_stack([series[k] for k in ("at_s", "field_nt", "field_sd_nt", "frequency_hz", "t2star_s",
                                                 "snr")])
    t_base = _timed(lambda: np.savetxt(io.StringIO(), table, delimiter=","))
    print(f"export of {n} results: CSV {t_csv:.2f} s, IAGA-2002 (1-second records) {t_iaga:.2f} s; "
          f"numpy.savetxt of 6 columns {t_base:.2f} s (ratios {t_csv / t_base:.2f}, {t_iaga / t_base:.2f})")


def maintenance(path: Path, n_shots: int) -> None:
    t_check = _timed(lambda: check_store(path))
    size = path.stat().st_size
    with Store(path) as store:
        t_compact = _timed(lambda: compact_samples(store, 0.0, START_S + 1e9, vacuum=True))
    print(f"db check of {n_shots} shots ({size / 1e6:.0f} MB): {t_check:.2f} s; compaction + VACUUM "
          f"{t_compact:.2f} s -> {path.stat().st_size / 1e6:.0f} MB")


def main(argv: list[str] | None = None) -> int:
    argv = argv or []
    n_shots = int(argv[0]) if argv else 100_000
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        write_per_shot(folder)
        path = folder / "large.sqlite"
        t_build = _timed(lambda: build_large(path, n_shots))
        print(f"built a store of {n_shots} shots in {t_build:.1f} s")
        queries(path)
        exports(path, folder)
        maintenance(path, n_shots)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
