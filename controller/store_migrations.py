"""Schema versions of the store and the steps that bring an older file up to date.

The version lives in `meta.schema_version`.  A new file gets the version-1 tables (the
SCHEMA in controller/store.py) and then every step below, so the upgrade path of an old
file and the creation of a new one are the same code.  Each step runs in one transaction
with the version bump, so a crash during an upgrade leaves the file at the old version.
A file written by a newer precess (higher version) is refused, never modified.

Version 2 adds:
  measurements  one row per field reading: time (centre of the acquisition windows), shot
                range, field and its uncertainty, frequency, T2*, SNR, gamma used; source
                'run' (a whole run's stack) or 'shots' (per shot or group of shots); the
                time series behind IAGA-2002 exports and reports
  gaps          intervals without data and why (written by whoever resumes after a stop)
  maintenance   what compaction and other maintenance did, when
  indexes       on times, so range queries stay fast with 100 000 shots
"""

from __future__ import annotations

import sqlite3
from typing import Callable

from controller.errors import StoreError

#: Centre of a shot's acquisition window in epoch seconds (the time a reading describes).
SHOT_TIME_SQL = "(started_at_s + (acquire_start_sample + 0.5 * acquire_samples) / sample_rate_hz)"

MEASUREMENT_COLUMNS = ("run_id", "at_s", "first_shot", "last_shot", "n_shots", "field_nt", "field_sd_nt",
                       "frequency_hz", "frequency_sd_hz", "t2star_s", "t2star_sd_s", "snr", "gamma_hz_per_nt",
                       "source", "created_at_s")

V2_SQL = f"""
CREATE TABLE IF NOT EXISTS measurements (
    run_id TEXT NOT NULL REFERENCES runs(run_id), at_s REAL NOT NULL,
    first_shot INTEGER NOT NULL, last_shot INTEGER NOT NULL, n_shots INTEGER NOT NULL,
    field_nt REAL, field_sd_nt REAL, frequency_hz REAL, frequency_sd_hz REAL,
    t2star_s REAL, t2star_sd_s REAL, snr REAL, gamma_hz_per_nt REAL,
    source TEXT NOT NULL, created_at_s REAL NOT NULL);
CREATE INDEX IF NOT EXISTS measurements_time ON measurements(at_s);
CREATE INDEX IF NOT EXISTS measurements_run ON measurements(run_id, source, at_s);
CREATE TABLE IF NOT EXISTS gaps (run_id TEXT, start_s REAL NOT NULL, end_s REAL NOT NULL, reason TEXT NOT NULL);
CREATE INDEX IF NOT EXISTS gaps_time ON gaps(start_s);
CREATE TABLE IF NOT EXISTS maintenance (at_s REAL NOT NULL, action TEXT NOT NULL, detail_json TEXT NOT NULL);
CREATE INDEX IF NOT EXISTS shots_time ON shots(started_at_s);
CREATE INDEX IF NOT EXISTS status_time ON status(at_s);
CREATE INDEX IF NOT EXISTS trips_time ON trips(at_s);
CREATE INDEX IF NOT EXISTS runs_started ON runs(started_at_s);
INSERT INTO measurements ({", ".join(MEASUREMENT_COLUMNS)})
SELECT r.run_id,
       (SELECT AVG({SHOT_TIME_SQL}) FROM shots s WHERE s.run_id = r.run_id AND s.bad = 0),
       (SELECT MIN(shot_index) FROM shots s WHERE s.run_id = r.run_id AND s.bad = 0),
       (SELECT MAX(shot_index) FROM shots s WHERE s.run_id = r.run_id AND s.bad = 0),
       COALESCE(json_extract(r.result_json, '$.shots'), 0),
       json_extract(r.result_json, '$.field_nt'), json_extract(r.result_json, '$.field_sd_nt'),
       json_extract(r.result_json, '$.frequency_hz'), json_extract(r.result_json, '$.frequency_sd_hz'),
       json_extract(r.result_json, '$.t2star_s'), json_extract(r.result_json, '$.t2star_sd_s'),
       json_extract(r.result_json, '$.snr'), json_extract(r.result_json, '$.gamma_hz_per_nt'),
       'run', r.created_at_s
FROM results r
WHERE json_extract(r.result_json, '$.field_nt') IS NOT NULL
  AND EXISTS (SELECT 1 FROM shots s WHERE s.run_id = r.run_id AND s.bad = 0);
"""


def _to_v2(db: sqlite3.Connection) -> None:
    for statement in V2_SQL.split(";"):
        if statement.strip():
            db.execute(statement)


#: version -> step that brings a file from version - 1 to version.
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {2: _to_v2}
SCHEMA_VERSION = max(MIGRATIONS)


def schema_version(db: sqlite3.Connection) -> int:
    row = db.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchone()
    return int(row[0]) if row else 0


def migrate(db: sqlite3.Connection, path: str) -> int:
    """Bring the open store up to SCHEMA_VERSION; return the version it had before (0: new file).

    The version is read again inside each step's transaction, so two processes opening the
    same old file at once upgrade it once.
    """
    before = schema_version(db)
    if before > SCHEMA_VERSION:
        raise StoreError(f"{path}: store has schema version {before}, newer than this precess reads "
                         f"(up to {SCHEMA_VERSION}); upgrade precess")
    while True:
        db.execute("BEGIN IMMEDIATE")
        try:
            version = schema_version(db)
            if version == 0:
                db.execute("INSERT INTO meta VALUES ('schema_version', '1')")
                version = 1
            if version < SCHEMA_VERSION:
                MIGRATIONS[version + 1](db)
                db.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", (str(version + 1),))
        except BaseException:
            db.execute("ROLLBACK")
            raise
        db.execute("COMMIT")
        if version >= SCHEMA_VERSION - 1:  # this pass reached the latest version
            return before
