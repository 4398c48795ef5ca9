"""Exports from a store: pick the data of a selection, hand it to a format writer, write atomically.

Every export is written to `<out>.part` and renamed when complete, so a failed or
interrupted export never leaves a half file under the requested name.
"""

from __future__ import annotations

import contextlib
import os
from pathlib import Path
from typing import Any, Iterator

import numpy as np

from controller import __version__
from controller.analysis.sources import analyse_records, default_channels
from controller.errors import InputError, PrecessError
from controller.export.iaga2002 import StationHeader, gamma_comment, grid_means, interval_type, write_iaga2002
from controller.export.jcampdx import FidForExport, jcampdx_lines
from controller.export.npz import MAX_SAMPLE_BYTES, shot_arrays, write_npz
from controller.export.results_csv import write_results_csv
from controller.export.wav import WavWriter
from controller.physics.constants import gamma_hz_per_nt
from controller.store import Store
from controller.store_queries import Selection, measurements, run_ids, shots

MAX_IAGA_RECORDS = 10_000_000


@contextlib.contextmanager
def atomic_output(out: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside `out`; rename it to `out` only if the block completes."""
    out = Path(out)
    if out.parent and not out.parent.is_dir():
        raise InputError(f"{out}: folder {out.parent} does not exist")
    part = out.with_name(out.name + ".part")
    try:
        yield part
        os.replace(part, out)
    finally:
        if part.exists():
            part.unlink()


def _readings(store: Store, sel: Selection) -> dict[str, np.ndarray]:
    series = measurements(store, sel)
    if not len(series["at_s"]):
        raise InputError(f"{store.path}: no field readings in {sel.describe()} "
                         "(`precess run` stores one per run; `precess db measure` one per shot)")
    return series


def _site_of(store: Store, runs: list[str], site: dict[str, Any] | None) -> dict[str, Any]:
    if site is not None:
        return site
    sites = {}
    for run_id in runs:
        snap = store.run(run_id)["config"].get("site")
        if snap is None:
            raise InputError(f"run {run_id} has no site in its stored configuration; give --site FILE "
                             "(a site TOML with name, latitude_deg, longitude_deg, altitude_m, iaga_code)")
        sites[snap.get("iaga_code")] = snap
    if len(sites) > 1:
        raise InputError(f"the selection spans stations {', '.join(map(str, sites))}; export one station at a time")
    return next(iter(sites.values()))


def export_iaga2002(store: Store, sel: Selection, out: str | Path, interval_s: float = 60.0,
                    data_type: str = "provisional", source: str | None = None, max_sd_nt: float | None = None,
                    site: dict[str, Any] | None = None) -> str:
    if interval_s <= 0:
        raise InputError(f"--interval-s {interval_s} is not allowed; must be > 0")
    series = _readings(store, sel)
    runs = list(dict.fromkeys(series["run_id"].tolist()))
    station = _site_of(store, runs, site)
    at_s, field_nt = series["at_s"], series["field_nt"].copy()
    if max_sd_nt is not None:
        field_nt[~(series["field_sd_nt"] <= max_sd_nt)] = np.nan
    from_s = sel.from_s if sel.from_s is not None else float(at_s.min())
    to_s = sel.to_s if sel.to_s is not None else float(at_s.max())
    if (to_s - from_s) / interval_s > MAX_IAGA_RECORDS:
        raise InputError(f"{(to_s - from_s) / interval_s:.0f} records of {interval_s:g} s is more than "
                         f"{MAX_IAGA_RECORDS}; choose a shorter --from/--to or a longer --interval-s")
    grid, means = grid_means(at_s, field_nt, interval_s, from_s, to_s)
    cadence = f"{float(np.median(np.diff(at_s))):.1f} second" if at_s.size > 1 else "single reading"
    rig_name = store.run(runs[0])["config"].get("rig", {}).get("name", "precess")
    header = StationHeader.from_site(station, source or f"{rig_name} (precess {__version__})", cadence,
                                     interval_type(interval_s), data_type)
    gammas = sorted({float(g) for g in series["gamma_hz_per_nt"] if np.isfinite(g)})
    comments = [gamma_comment(gammas),
                f"Total field F from {at_s.size} proton-precession reading(s) of {len(runs)} run(s); each value "
                f"is the mean of the readings whose acquisition centre lies in [t, t + {interval_s:g} s).",
                "X, Y, Z: 88888.00 (not recorded: scalar sensor); 99999.00: missing (no reading"
                + (f" with sd <= {max_sd_nt:g} nT)." if max_sd_nt is not None else ").")]
    with atomic_output(out) as part, open(part, "w", encoding="ascii", newline="\n") as f:
        records = write_iaga2002(f, header, grid, means, comments)
    missing = int(np.count_nonzero(~np.isfinite(means)))
    return f"wrote {out}: IAGA-2002, {records} record(s) of {interval_s:g} s, {missing} missing"


def export_jcampdx(store: Store, sel: Selection, out: str | Path, shot_index: int | None = None) -> str:
    runs = run_ids(store, sel)
    if len(runs) != 1:
        raise InputError(f"a JCAMP-DX export holds one FID; the selection ({sel.describe()}) has {len(runs)} runs: "
                         "give --run ID")
    run = store.run(runs[0])
    lo = -np.inf if sel.from_s is None else sel.from_s
    hi = np.inf if sel.to_s is None else sel.to_s
    chosen = [s for s in store.shots(runs[0], lo, hi)
              if (s.shot_index == shot_index if shot_index is not None else not s.bad)]
    if not chosen:
        what = f"shot {shot_index}" if shot_index is not None else "good shot"
        raise InputError(f"run {runs[0]}: no {what} with raw samples in the selection (compacted?)")
    signal, _ = default_channels(tuple(chosen[0].channel_names))
    windows = [np.asarray(s.samples[signal, s.acquire_start_sample:s.acquire_start_sample + s.acquire_samples],
                          dtype=float) for s in chosen]
    try:
        result = analyse_records(chosen)
    except (PrecessError, ValueError, ArithmeticError, np.linalg.LinAlgError):
        result = None
    if result is not None and result.detected:
        frequency_hz = result.frequency_hz
    else:
        site = run["config"].get("site", {})
        frequency_hz = site.get("field_nt", 50000.0) * gamma_hz_per_nt("shielded")
    fid = np.mean(windows, axis=0)  # the raw stack: shots share the switch-off's phase
    first = chosen[0]
    config = run["config"]
    title = f"run {runs[0]}" + (f" shot {shot_index}" if shot_index is not None else f" stack of {len(chosen)}")
    export = FidForExport(title=title, signal_v=fid, sample_rate_hz=first.sample_rate_hz,
                          first_time_s=first.dead_time_s,
                          observe_frequency_hz=frequency_hz, averages=len(chosen),
                          origin=str(config.get("site", {}).get("name", "unknown site")),
                          owner="precess user", instrument=str(config.get("rig", {}).get("name", "unknown rig")),
                          started_at_s=chosen[0].started_at_s, run_id=runs[0])
    with atomic_output(out) as part:
        part.write_text("\n".join(jcampdx_lines(export)) + "\n", encoding="ascii")
    return f"wrote {out}: JCAMP-DX FID and spectrum, {fid.size} points, {len(chosen)} shot(s) stacked"


def export_csv(store: Store, sel: Selection, out: str | Path) -> str:
    series = _readings(store, sel)
    with atomic_output(out) as part, open(part, "w", encoding="utf-8", newline="") as f:
        rows = write_results_csv(f, series)
    return f"wrote {out}: CSV, {rows} reading(s)"


def _full_scale_v(store: Store, run_id: str, cache: dict[str, float]) -> float:
    if run_id not in cache:
        receive = store.run(run_id)["config"].get("rig", {}).get("receive", {})
        cache[run_id] = float(receive.get("adc_full_scale_v", 1.0))
    return cache[run_id]


def export_wav(store: Store, sel: Selection, out: str | Path, encoding: str = "float32",
               shot_index: int | None = None) -> str:
    """Raw shots back to back (or the one shot `shot_index`), one WAV channel per recorded channel."""
    writer, count, full_scale, first = None, 0, {}, None
    with atomic_output(out) as part:
        try:
            for s in shots(store, sel):
                if shot_index is not None and s.shot_index != shot_index:
                    continue
                if writer is None:
                    first = s
                    names = ", ".join(s.channel_names)
                    writer = WavWriter(part, s.sample_rate_hz, s.samples.shape[0], encoding,
                                       f"precess shots of {sel.describe()}, back to back; channels: {names}; "
                                       f"1.0 = converter full scale")
                elif s.sample_rate_hz != first.sample_rate_hz or s.samples.shape[0] != first.samples.shape[0]:
                    raise InputError(f"run {s.run_id} shot {s.shot_index} differs in rate or channels from the "
                                     "first shot; export one run at a time")
                writer.write(s.samples / _full_scale_v(store, s.run_id, full_scale))
                count += 1
        finally:
            if writer is not None:
                writer.close()
        if writer is None:
            which = f"shot {shot_index} of " if shot_index is not None else ""
            raise InputError(f"{store.path}: no raw samples for {which}{sel.describe()} (compacted, or no such shot)")
    several = ("; shots lie back to back, and `precess analyze` fits a file as one record: export one with --shot N"
               if count > 1 else "")
    clipped = f", {writer.clipped} sample(s) clipped at full scale" if writer.clipped else ""
    return (f"wrote {out}: WAV {encoding}, {count} shot(s), {writer.frames} frames x {writer.n_channels} "
            f"channel(s) at {first.sample_rate_hz:g} Hz{clipped}{several}")


def export_npz(store: Store, sel: Selection, out: str | Path, with_samples: bool = True) -> str:
    series = measurements(store, sel)
    arrays: dict[str, np.ndarray] = {}
    if with_samples:
        runs = run_ids(store, sel)
        where, params = sel.where("started_at_s")
        marks = ", ".join("?" * len(runs))
        total = store.db.execute(f"SELECT COALESCE(SUM(length(samples)), 0) FROM shots WHERE {where} "
                                 f"AND run_id IN ({marks})", params + runs).fetchone()[0] if runs else 0
        if total > MAX_SAMPLE_BYTES:
            raise InputError(f"{total / 1e9:.1f} GB of raw samples in {sel.describe()}; export fewer shots "
                             "(--run or --from/--to) or only the readings (--results-only)")
        arrays = shot_arrays(shots(store, sel))
    if not len(series["at_s"]) and not arrays:
        raise InputError(f"{store.path}: nothing to export in {sel.describe()}")
    with atomic_output(out) as part:
        write_npz(part, series, arrays)
    n_shots = len(arrays.get("shot_index", []))
    return f"wrote {out}: NumPy npz, {len(series['at_s'])} reading(s), {n_shots} shot(s) of raw samples"
