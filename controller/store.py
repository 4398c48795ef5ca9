"""The store: SQLite in WAL mode, one transaction per shot.

A crash or power cut loses at most the shot in flight: each ShotAcquired is written and
committed in its own transaction with synchronous=FULL.  Raw samples of every channel are
kept as little-endian float32 with a SHA-256 checksum, so analysis can always be recomputed.
"""

from __future__ import annotations

import hashlib
import json
import math
import sqlite3
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator

import numpy as np

from controller.errors import StoreError
from controller.records import (
    EXIT_FAILED, InterlockTripped, Record, RunFinished, RunStarted, ShotAcquired, StatusSample,
)
from controller.store_migrations import MEASUREMENT_COLUMNS, SCHEMA_VERSION, SHOT_TIME_SQL, migrate

SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS runs (
    run_id TEXT PRIMARY KEY, started_at_s REAL NOT NULL, finished_at_s REAL,
    sequence_name TEXT NOT NULL, sequence_kind TEXT NOT NULL, shots_planned INTEGER NOT NULL,
    sample_rate_hz REAL NOT NULL, simulated INTEGER NOT NULL, software_version TEXT NOT NULL,
    config_json TEXT NOT NULL, exit_status TEXT, reason TEXT, shots_completed INTEGER);
CREATE TABLE IF NOT EXISTS shots (
    run_id TEXT NOT NULL REFERENCES runs(run_id), shot_index INTEGER NOT NULL,
    started_at_s REAL NOT NULL, sample_rate_hz REAL NOT NULL, channel_names TEXT NOT NULL,
    n_channels INTEGER NOT NULL, n_samples INTEGER NOT NULL, samples BLOB, sha256 TEXT NOT NULL,
    switch_off_sample INTEGER NOT NULL, acquire_start_sample INTEGER NOT NULL, acquire_samples INTEGER NOT NULL,
    dead_time_s REAL NOT NULL, latency_samples INTEGER NOT NULL, bad INTEGER NOT NULL, notes TEXT NOT NULL,
    PRIMARY KEY (run_id, shot_index));
CREATE TABLE IF NOT EXISTS status (run_id TEXT NOT NULL, at_s REAL NOT NULL, readings_json TEXT NOT NULL);
CREATE INDEX IF NOT EXISTS status_run ON status(run_id, at_s);
CREATE TABLE IF NOT EXISTS trips (run_id TEXT NOT NULL, at_s REAL NOT NULL, check_name TEXT NOT NULL,
    reason TEXT NOT NULL, values_json TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS results (run_id TEXT NOT NULL, created_at_s REAL NOT NULL, kind TEXT NOT NULL,
    result_json TEXT NOT NULL);
CREATE INDEX IF NOT EXISTS results_run ON results(run_id);
"""
STATUS_FLUSH_COUNT = 50


def _number_or_none(value: Any) -> float | None:
    """A result value as a float for SQLite (NaN is stored as NULL), or None if absent or not a number."""
    try:
        return None if value is None else float(value)
    except (TypeError, ValueError):
        return None


@dataclass(frozen=True)
class StoredShot:
    run_id: str
    shot_index: int
    started_at_s: float
    sample_rate_hz: float
    channel_names: tuple[str, ...]
    samples: np.ndarray
    switch_off_sample: int
    acquire_start_sample: int
    acquire_samples: int
    dead_time_s: float
    bad: bool


class Store:
    """One SQLite database file; use as a context manager or call close()."""

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self.db = sqlite3.connect(str(self.path), isolation_level=None, check_same_thread=False)
            self.db.execute("PRAGMA journal_mode=WAL")
            self.db.execute("PRAGMA synchronous=FULL")
            self.db.execute("PRAGMA foreign_keys=ON")
            self.db.executescript(SCHEMA)
            self.schema_version_before = migrate(self.db, str(self.path))
        except (sqlite3.Error, OSError) as exc:
            raise StoreError(f"{self.path}: cannot open the store ({exc})") from None
        self._pending_status: list[tuple[str, float, str]] = []

    def close(self) -> None:
        try:
            self.flush_status()
        finally:
            self.db.close()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # ---- writing ------------------------------------------------------------------------
    def write(self, record: Record) -> None:
        """Sink for engine records.  Raises on failure so the engine stops the run."""
        if isinstance(record, RunStarted):
            self._tx("INSERT INTO runs (run_id, started_at_s, sequence_name, sequence_kind, shots_planned, "
                     "sample_rate_hz, simulated, software_version, config_json) VALUES (?,?,?,?,?,?,?,?,?)",
                     (record.run_id, record.started_at_s, record.sequence_name, record.sequence_kind,
                      record.shots_planned, record.sample_rate_hz, int(record.simulated), record.software_version,
                      json.dumps(record.config, sort_keys=True, default=str)))
        elif isinstance(record, ShotAcquired):
            self.flush_status()
            blob = np.ascontiguousarray(record.samples, dtype="<f4").tobytes()
            self._tx("INSERT INTO shots VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
                     (record.run_id, record.shot_index, record.started_at_s, record.sample_rate_hz,
                      json.dumps(list(record.channel_names)), record.samples.shape[0], record.samples.shape[1],
                      blob, hashlib.sha256(blob).hexdigest(), record.switch_off_sample, record.acquire_start_sample,
                      record.acquire_samples, record.dead_time_s, record.latency_samples, int(record.bad),
                      json.dumps(list(record.notes))))
        elif isinstance(record, StatusSample):
            self._pending_status.append((record.run_id, record.at_s, json.dumps(record.readings)))
            if len(self._pending_status) >= STATUS_FLUSH_COUNT:
                self.flush_status()
        elif isinstance(record, InterlockTripped):
            self.flush_status()
            self._tx("INSERT INTO trips VALUES (?,?,?,?,?)",
                     (record.run_id, record.at_s, record.check, record.reason, json.dumps(record.values)))
        elif isinstance(record, RunFinished):
            self.flush_status()
            self._tx("UPDATE runs SET finished_at_s=?, exit_status=?, reason=?, shots_completed=? WHERE run_id=?",
                     (record.finished_at_s, record.exit_status, record.reason, record.shots_completed, record.run_id))

    def flush_status(self) -> None:
        if not self._pending_status:
            return
        rows, self._pending_status = self._pending_status, []
        try:
            with self._transaction():
                self.db.executemany("INSERT INTO status VALUES (?,?,?)", rows)
        except sqlite3.Error as exc:
            raise StoreError(f"{self.path}: write failed ({exc})") from None

    def add_result(self, run_id: str, kind: str, result: dict[str, Any], created_at_s: float) -> None:
        """Store a run-level result; one with a field also becomes a measurement (same transaction)."""
        try:
            with self._transaction():
                self.db.execute("INSERT INTO results VALUES (?,?,?,?)",
                                (run_id, created_at_s, kind, json.dumps(result)))
                if result.get("field_nt") is not None:
                    self._insert_measurement(run_id, result, created_at_s, None, "run")
        except sqlite3.Error as exc:
            raise StoreError(f"{self.path}: write failed ({exc})") from None

    def replace_measurements(self, run_id: str, readings: list[tuple[dict[str, Any], tuple[int, int]]],
                             created_at_s: float, source: str = "shots") -> None:
        """Replace the run's readings of this source by new ones, each (result, (first, last good shot)).

        One transaction: a reader sees the old set or the new one, never a mix.
        """
        try:
            with self._transaction():
                self.db.execute("DELETE FROM measurements WHERE run_id = ? AND source = ?", (run_id, source))
                for result, shot_range in readings:
                    self._insert_measurement(run_id, result, created_at_s, shot_range, source)
        except sqlite3.Error as exc:
            raise StoreError(f"{self.path}: write failed ({exc})") from None

    def _insert_measurement(self, run_id: str, result: dict[str, Any], created_at_s: float,
                            shot_indices: tuple[int, int] | None, source: str) -> None:
        first, last = shot_indices if shot_indices is not None else (-1, 2**62)
        at_s, lo, hi, n = self.db.execute(
            f"SELECT AVG({SHOT_TIME_SQL}), MIN(shot_index), MAX(shot_index), COUNT(*) FROM shots "
            "WHERE run_id = ? AND bad = 0 AND shot_index BETWEEN ? AND ?", (run_id, first, last)).fetchone()
        if not n:
            raise sqlite3.IntegrityError(f"run {run_id} has no good shot in {first}..{last} to measure")
        values = [_number_or_none(result.get(k)) for k in MEASUREMENT_COLUMNS[5:13]]
        self.db.execute(f"INSERT INTO measurements ({', '.join(MEASUREMENT_COLUMNS)}) "
                        f"VALUES ({', '.join('?' * len(MEASUREMENT_COLUMNS))})",
                        (run_id, at_s, lo, hi, n, *values, source, created_at_s))

    # ---- resuming after a stop ---------------------------------------------------------
    def last_shot(self, run_id: str) -> tuple[int, float] | None:
        """(shot_index, started_at_s) of the run's last committed shot, or None if it has none."""
        row = self.db.execute("SELECT shot_index, started_at_s FROM shots WHERE run_id = ? "
                              "ORDER BY shot_index DESC LIMIT 1", (run_id,)).fetchone()
        return (int(row[0]), float(row[1])) if row else None

    def unfinished_runs(self) -> list[str]:
        """Runs with no end record: the process stopped (killed, power cut) while they ran."""
        cur = self.db.execute("SELECT run_id FROM runs WHERE exit_status IS NULL ORDER BY started_at_s")
        return [r[0] for r in cur.fetchall()]

    def close_unfinished_run(self, run_id: str, reason: str) -> None:
        """End a run that has no end record: status failed, finished at its last shot (or start)."""
        self._tx("UPDATE runs SET exit_status = ?, reason = ?, "
                 "shots_completed = (SELECT COUNT(*) FROM shots s WHERE s.run_id = runs.run_id), "
                 "finished_at_s = COALESCE((SELECT MAX(started_at_s) FROM shots s WHERE s.run_id = runs.run_id), "
                 "started_at_s) WHERE run_id = ? AND exit_status IS NULL", (EXIT_FAILED, reason, run_id))

    def record_gap(self, run_id: str | None, start_s: float, end_s: float, reason: str) -> None:
        """Record an interval without data (e.g. from the last committed shot to a resume) and why."""
        if end_s < start_s:
            raise StoreError(f"{self.path}: gap ends ({end_s}) before it starts ({start_s})")
        self._tx("INSERT INTO gaps VALUES (?,?,?,?)", (run_id, start_s, end_s, reason))

    def record_maintenance(self, at_s: float, action: str, detail: dict[str, Any]) -> None:
        """One row in the maintenance table (what a campaign or a compaction did, when)."""
        self._tx("INSERT INTO maintenance VALUES (?,?,?)", (at_s, action, json.dumps(detail, sort_keys=True)))

    def _tx(self, sql: str, params: tuple) -> None:
        try:
            with self._transaction():
                self.db.execute(sql, params)
        except sqlite3.Error as exc:
            raise StoreError(f"{self.path}: write failed ({exc})") from None

    def _transaction(self) -> Any:
        db = self.db

        class _Tx:
            def __enter__(self) -> None:
                db.execute("BEGIN IMMEDIATE")

            def __exit__(self, exc_type: object, *rest: object) -> None:
                if exc_type is None:
                    db.execute("COMMIT")
                elif db.in_transaction:  # SQLite may have rolled back already (e.g. on SQLITE_FULL)
                    db.execute("ROLLBACK")

        return _Tx()

    # ---- reading ------------------------------------------------------------------------
    def runs(self) -> list[dict[str, Any]]:
        cur = self.db.execute("SELECT run_id, started_at_s, finished_at_s, sequence_name, sequence_kind, shots_planned, "
                              "shots_completed, exit_status, reason, simulated, "
                              "(SELECT COUNT(*) FROM shots s WHERE s.run_id = r.run_id) FROM runs r ORDER BY started_at_s")
        keys = ("run_id", "started_at_s", "finished_at_s", "sequence_name", "sequence_kind", "shots_planned",
                "shots_completed", "exit_status", "reason", "simulated", "shots_stored")
        return [dict(zip(keys, row)) for row in cur.fetchall()]

    def resolve_run_id(self, run_id: str) -> str:
        """A run id as given, or the newest run's id for 'latest'."""
        if run_id != "latest":
            return run_id
        row = self.db.execute("SELECT run_id FROM runs ORDER BY started_at_s DESC LIMIT 1").fetchone()
        if row is None:
            raise StoreError(f"{self.path}: no runs stored, so there is no 'latest'")
        return row[0]

    def run(self, run_id: str) -> dict[str, Any]:
        row = self.db.execute("SELECT run_id, config_json, sample_rate_hz, sequence_name, exit_status FROM runs "
                              "WHERE run_id = ?", (run_id,)).fetchone()
        if row is None:
            known = ", ".join(r["run_id"] for r in self.runs()[-5:]) or "none"
            raise StoreError(f"{self.path}: no run {run_id!r} (latest: {known})")
        return {"run_id": row[0], "config": json.loads(row[1]), "sample_rate_hz": row[2], "sequence_name": row[3],
                "exit_status": row[4]}

    def shots(self, run_id: str, from_s: float = -math.inf, to_s: float = math.inf) -> Iterator[StoredShot]:
        """The run's shots with samples (compacted ones skipped), optionally only those started in [from_s, to_s]."""
        cur = self.db.execute("SELECT shot_index, started_at_s, sample_rate_hz, channel_names, n_channels, n_samples, "
                              "samples, sha256, switch_off_sample, acquire_start_sample, acquire_samples, dead_time_s, "
                              "bad FROM shots WHERE run_id = ? AND started_at_s BETWEEN ? AND ? ORDER BY shot_index",
                              (run_id, from_s, to_s))
        for row in cur:
            (index, started, fs, names, n_ch, n_s, blob, digest, off, acq, acq_n, dead, bad) = row
            if blob is None:
                continue
            if hashlib.sha256(blob).hexdigest() != digest:
                raise StoreError(f"{self.path}: run {run_id} shot {index}: sample checksum mismatch")
            samples = np.frombuffer(blob, dtype="<f4").reshape(n_ch, n_s)
            yield StoredShot(run_id, index, started, fs, tuple(json.loads(names)), samples, off, acq, acq_n, dead,
                             bool(bad))

    def results(self, run_id: str) -> list[dict[str, Any]]:
        cur = self.db.execute("SELECT kind, result_json FROM results WHERE run_id = ? ORDER BY created_at_s", (run_id,))
        return [{"kind": k, **json.loads(j)} for k, j in cur.fetchall()]

    def latest_frequency_hz(self, rig_name: str | None = None) -> tuple[float, str] | None:
        """The most recent measured Larmor frequency (a result holding frequency_hz) and its run id,
        optionally only from runs of the rig named rig_name; None if there is none."""
        sql = ("SELECT json_extract(s.result_json, '$.frequency_hz'), s.run_id FROM results s JOIN runs r "
               "ON r.run_id = s.run_id WHERE json_extract(s.result_json, '$.frequency_hz') IS NOT NULL")
        params: tuple = ()
        if rig_name is not None:
            sql += " AND json_extract(r.config_json, '$.rig.name') = ?"
            params = (rig_name,)
        row = self.db.execute(sql + " ORDER BY s.created_at_s DESC LIMIT 1", params).fetchone()
        return (float(row[0]), row[1]) if row else None

    def integrity_ok(self) -> bool:
        return self.db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
