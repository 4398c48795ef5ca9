"""Read-only queries for exports and reports: a selection (one run or a time range) and the
time series, status readings, trips and gaps inside it.

Measurements: a run may hold readings of its whole stack (source 'run', written by
`precess run`) and per-shot or per-group readings (source 'shots', written by `precess db
measure`); a query returns, for each run, the 'shots' readings if it has any, else its
'run' reading, so a run is never counted twice.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Iterator

import numpy as np

from controller.errors import InputError
from controller.store import Store, StoredShot
from controller.store_migrations import MEASUREMENT_COLUMNS

_FLOAT_COLUMNS = ("at_s", "field_nt", "field_sd_nt", "frequency_hz", "frequency_sd_hz", "t2star_s", "t2star_sd_s",
                  "snr", "gamma_hz_per_nt")
_INT_COLUMNS = ("first_shot", "last_shot", "n_shots")
_READING_KEY = re.compile(r"[A-Za-z0-9_]+")


@dataclass(frozen=True)
class Selection:
    """One run, a time range (epoch seconds, UTC), both, or neither (everything)."""

    run_id: str | None = None
    from_s: float | None = None
    to_s: float | None = None

    def where(self, time_column: str, run_column: str = "run_id") -> tuple[str, list[Any]]:
        """SQL condition (never empty) and its parameters."""
        parts, params = ["1"], []
        if self.run_id is not None:
            parts.append(f"{run_column} = ?")
            params.append(self.run_id)
        if self.from_s is not None:
            parts.append(f"{time_column} >= ?")
            params.append(self.from_s)
        if self.to_s is not None:
            parts.append(f"{time_column} <= ?")
            params.append(self.to_s)
        return " AND ".join(parts), params

    def describe(self) -> str:
        import time

        def utc(t: float) -> str:
            return time.strftime("%Y-%m-%d %H:%M:%S UTC", time.gmtime(t))

        words = [f"run {self.run_id}"] if self.run_id else []
        if self.from_s is not None:
            words.append(f"from {utc(self.from_s)}")
        if self.to_s is not None:
            words.append(f"to {utc(self.to_s)}")
        return ", ".join(words) or "all runs"


def run_ids(store: Store, sel: Selection) -> list[str]:
    """Runs in the selection, oldest first; an unknown --run is an error naming the latest runs."""
    if sel.run_id is not None:
        store.run(sel.run_id)  # raises StoreError for an unknown run
    end = "COALESCE(finished_at_s, (SELECT MAX(started_at_s) FROM shots s WHERE s.run_id = r.run_id), started_at_s)"
    where, params = Selection(sel.run_id).where("started_at_s")
    if sel.to_s is not None:
        where += " AND started_at_s <= ?"
        params.append(sel.to_s)
    if sel.from_s is not None:
        where += f" AND {end} >= ?"
        params.append(sel.from_s)
    cur = store.db.execute(f"SELECT run_id FROM runs r WHERE {where} ORDER BY started_at_s", params)
    return [row[0] for row in cur.fetchall()]


def measurements(store: Store, sel: Selection) -> dict[str, np.ndarray]:
    """The field readings in the selection, sorted by time: one array per column (NULL -> NaN)."""
    if sel.run_id is not None:
        store.run(sel.run_id)  # raises StoreError for an unknown run
    where, params = sel.where("at_s")
    cur = store.db.execute(
        f"SELECT {', '.join(MEASUREMENT_COLUMNS)} FROM measurements m WHERE {where} "
        "AND source = (CASE WHEN EXISTS (SELECT 1 FROM measurements m2 WHERE m2.run_id = m.run_id "
        "AND m2.source = 'shots') THEN 'shots' ELSE 'run' END) "
        "ORDER BY at_s", params)
    rows = cur.fetchall()
    columns = list(zip(*rows)) if rows else [()] * len(MEASUREMENT_COLUMNS)
    out: dict[str, np.ndarray] = {}
    for name, values in zip(MEASUREMENT_COLUMNS, columns):
        if name in _FLOAT_COLUMNS:
            out[name] = np.array([np.nan if v is None else v for v in values], dtype=float)
        elif name in _INT_COLUMNS:
            out[name] = np.array(values, dtype=np.int64)
        else:
            out[name] = np.array(values, dtype=object)
    return out


def status_series(store: Store, sel: Selection, reading: str) -> tuple[np.ndarray, np.ndarray]:
    """(at_s, value) of one status reading (e.g. 'coil_temperature_c') where it was recorded."""
    if not _READING_KEY.fullmatch(reading):
        raise InputError(f"status reading {reading!r} is not a plain name; allowed: letters, digits, _")
    where, params = sel.where("at_s")
    cur = store.db.execute(
        f"SELECT at_s, json_extract(readings_json, '$.{reading}') AS v FROM status "
        f"WHERE {where} AND v IS NOT NULL ORDER BY at_s", params)
    rows = np.array(cur.fetchall(), dtype=float).reshape(-1, 2)
    return rows[:, 0], rows[:, 1]


def trips(store: Store, sel: Selection) -> list[dict[str, Any]]:
    where, params = sel.where("at_s")
    cur = store.db.execute(f"SELECT run_id, at_s, check_name, reason FROM trips WHERE {where} ORDER BY at_s", params)
    return [dict(zip(("run_id", "at_s", "check_name", "reason"), row)) for row in cur.fetchall()]


def recorded_gaps(store: Store, sel: Selection) -> list[dict[str, Any]]:
    """Gaps written by whoever resumed after a stop, overlapping the selection."""
    parts, params = ["1"], []
    if sel.run_id is not None:
        parts.append("run_id = ?")
        params.append(sel.run_id)
    if sel.from_s is not None:
        parts.append("end_s >= ?")
        params.append(sel.from_s)
    if sel.to_s is not None:
        parts.append("start_s <= ?")
        params.append(sel.to_s)
    cur = store.db.execute(f"SELECT run_id, start_s, end_s, reason FROM gaps WHERE {' AND '.join(parts)} "
                           "ORDER BY start_s", params)
    return [dict(zip(("run_id", "start_s", "end_s", "reason"), row)) for row in cur.fetchall()]


def shots(store: Store, sel: Selection) -> Iterator[StoredShot]:
    """Shots with raw samples in the selection, run by run (compacted shots are skipped)."""
    for run_id in run_ids(store, sel):
        yield from store.shots(run_id, -np.inf if sel.from_s is None else sel.from_s,
                               np.inf if sel.to_s is None else sel.to_s)
