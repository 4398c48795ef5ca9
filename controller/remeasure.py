"""Field readings per shot or per group of shots, recomputed from the stored raw samples.

A base-station run of many shots has one run-level result (its whole stack); a time series
needs a reading per shot (or per group of N consecutive good shots, stacked for SNR).  Each
group goes through the same analysis as a run (controller.analysis.run_analysis); the
readings replace the run's earlier per-shot readings in one transaction.
"""

from __future__ import annotations

from typing import Iterable, Iterator

from controller.analysis.run_analysis import analyse_shots, window_of
from controller.store import Store, StoredShot
from controller.store_queries import Selection, run_ids


def _groups(shots: Iterable[StoredShot], group: int) -> Iterator[list[StoredShot]]:
    """Consecutive good shots, `group` at a time (the last group may be smaller); streams."""
    members: list[StoredShot] = []
    for shot in shots:
        if shot.bad:
            continue
        members.append(shot)
        if len(members) == group:
            yield members
            members = []
    if members:
        yield members


def remeasure(store: Store, sel: Selection, group: int, created_at_s: float) -> list[tuple[str, int, int]]:
    """Fit every group of `group` good shots of each run in the selection; return (run, readings, failures)."""
    summary = []
    for run_id in run_ids(store, sel):
        readings, failed, seen = [], 0, 0
        for members in _groups(store.shots(run_id), group):
            seen += 1
            windows = [window_of(s.samples, s.channel_names, s.sample_rate_hz, s.acquire_start_sample,
                                 s.acquire_samples, s.dead_time_s) for s in members]
            try:
                result = analyse_shots(windows)
            except (ValueError, ArithmeticError):
                failed += 1
                continue
            readings.append((result, (members[0].shot_index, members[-1].shot_index)))
        if not seen:
            continue  # no raw samples (compacted or none stored): keep what is there
        store.replace_measurements(run_id, readings, created_at_s)
        summary.append((run_id, len(readings), failed))
    return summary
