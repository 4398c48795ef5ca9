"""The report's short text summary: what ran, what the field did, what went wrong."""

from __future__ import annotations

import time
from collections import Counter

import numpy as np

from controller.report.data import ReportData

MAX_LISTED = 10
LARMOR_BAND_HZ = 100.0
LINE_EXCLUSION_BINS = 4  # a Hann window's main lobe is +/- 2 bins wide


def _utc(t_s: float) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%S UTC", time.gmtime(t_s))


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.1f} min"
    return f"{seconds / 3600:.1f} h"


def noise_floor_near_larmor(data: ReportData) -> float | None:
    """Median signal-channel ASD within +/- 100 Hz of the Larmor line, the line itself (+/- 4 bins) left out."""
    larmor = data.readings["frequency_hz"]
    if data.noise is None or not np.isfinite(larmor).any():
        return None
    f0 = float(np.nanmedian(larmor))
    f = data.noise.frequency_hz
    asd = data.noise.asd_nv_per_rthz.get("signal", next(iter(data.noise.asd_nv_per_rthz.values())))
    band = (np.abs(f - f0) <= LARMOR_BAND_HZ) & (np.abs(f - f0) > LINE_EXCLUSION_BINS * (f[1] - f[0]))
    return float(np.median(asd[band])) if band.any() else None


def summary_lines(data: ReportData) -> list[str]:
    lines = [f"precess report: {data.selection.describe()} in {data.store_path}"]
    span = data.time_span_s
    if span:
        lines.append(f"period: {_utc(span[0])} to {_utc(span[1])} ({_duration(span[1] - span[0])})")
    statuses = Counter(r["exit_status"] or "unfinished" for r in data.runs)
    lines.append(f"runs: {len(data.runs)} ({', '.join(f'{n} {s}' for s, n in sorted(statuses.items())) or 'none'})")
    lines.append(f"shots: {data.shots_stored} stored, {data.shots_compacted} compacted (raw samples dropped), "
                 f"{data.shots_bad} flagged bad")
    r = data.readings
    b = r["field_nt"][np.isfinite(r["field_nt"])]
    if b.size:
        lines.append(f"field: {b.size} reading(s), mean {b.mean():.2f} nT, min {b.min():.2f}, max {b.max():.2f}, "
                     f"range {np.ptp(b):.2f} nT; median sd {np.nanmedian(r['field_sd_nt']):.3f} nT")
        lines.append(f"T2*: median {np.nanmedian(r['t2star_s']):.3f} s; SNR: median {np.nanmedian(r['snr']):.1f}, "
                     f"min {np.nanmin(r['snr']):.1f}")
        gammas = sorted({float(g) for g in r["gamma_hz_per_nt"] if np.isfinite(g)})
        lines.append("gamma'p/2pi used: " + ", ".join(f"{g:.11f} Hz/nT" for g in gammas))
    else:
        lines.append("field: no readings (run `precess db measure` to fit the stored shots)")
    if data.temperature_c.size:
        limit = f" (limit {data.temperature_limit_c:g} C)" if data.temperature_limit_c is not None else ""
        lines.append(f"coil temperature: {data.temperature_c.min():.1f} to {data.temperature_c.max():.1f} C{limit}")
    floor = noise_floor_near_larmor(data)
    if floor is not None:
        lines.append(f"noise near the Larmor line: {floor:.2f} nV/sqrt(Hz) at the coil ({data.noise.shots} shot(s))")
    total_gap = sum(g["end_s"] - g["start_s"] for g in data.gaps)
    lines.append(f"gaps: {len(data.gaps)}" + (f", {_duration(total_gap)} in all" if data.gaps else ""))
    for g in data.gaps[:MAX_LISTED]:
        lines.append(f"  {_utc(g['start_s'])} for {_duration(g['end_s'] - g['start_s'])}: {g['reason']}")
    lines.append(f"trips: {len(data.trips)}")
    for t in data.trips[:MAX_LISTED]:
        lines.append(f"  {_utc(t['at_s'])} {t['check_name']}: {t['reason']}")
    unfinished = [r["run_id"] for r in data.runs if r["exit_status"] is None]
    for run in data.runs:
        if run["exit_status"] not in (None, "completed"):
            lines.append(f"run {run['run_id']} {run['exit_status']}: {run['reason']}")
    if unfinished:
        lines.append(f"unfinished (no end record: killed or still running): {', '.join(unfinished[:MAX_LISTED])}")
    return lines
