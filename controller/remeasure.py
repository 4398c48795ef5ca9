"""Field readings per shot or per group of shots, recomputed from the stored raw samples.

A base-station run of many shots has one run-level result (its whole stack); a time series
needs a reading per shot (or per group of N consecutive good shots, stacked for SNR).  Each
group goes through the same analysis as a run (controller.analysis.sources.analyse_records);
a group without a detected FID counts as a failure.  The readings replace the run's earlier per-shot readings in one transaction.
"""

from __future__ import annotations

from typing import Iterable, Iterator

import numpy as np

from controller.analysis.sources import analyse_records
from controller.errors import PrecessError
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
            try:
                result = analyse_records(members).as_dict()
            except (PrecessError, ValueError, ArithmeticError, np.linalg.LinAlgError):
                failed += 1
                continue
            if not result["detected"]:
                failed += 1
                continue
            readings.append((result, (members[0].shot_index, members[-1].shot_index)))
        if not seen:
            continue  # no raw samples (compacted or none stored): keep what is there
        store.replace_measurements(run_id, readings, created_at_s)
        summary.append((run_id, len(readings), failed))
    return summary
