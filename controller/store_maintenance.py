"""Integrity check and compaction of a store file.

Check: SQLite's own `PRAGMA integrity_check` (or `quick_check`) and `foreign_key_check`,
then every shot's samples against the SHA-256 stored when it was written, reported per
run.  The check opens the file read-only and never changes it.

Compaction: raw samples older than a given age are set to NULL; the shot row, its timing,
its checksum and every result and measurement stay, so the time series, the trips and the
report survive while the file stops growing.  By default only shots of runs that have a
result are compacted (the samples of an unanalysed run are its only data).  Freed pages are
reused by later writes; VACUUM (optional) gives them back to the file system, but needs
free disk space about the size of the file while it runs.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from dataclasses import dataclass, field
from pathlib import Path

from controller.errors import StoreError
from controller.store import Store

COMPACT_BATCH_SHOTS = 500
SECONDS_PER_DAY = 86400.0


@dataclass
class RunCheck:
    """What the check found in one run."""

    run_id: str
    exit_status: str | None
    shots: int = 0
    compacted: int = 0
    bad_checksums: list[int] = field(default_factory=list)
    missing_indices: list[int] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.bad_checksums


@dataclass
class CheckReport:
    path: str
    sqlite_messages: list[str]
    foreign_key_problems: int
    runs: list[RunCheck]
    checksums_verified: bool

    @property
    def ok(self) -> bool:
        return self.sqlite_messages == ["ok"] and self.foreign_key_problems == 0 and all(r.ok for r in self.runs)


def _open_read_only(path: Path) -> sqlite3.Connection:
    if not path.is_file():
        raise StoreError(f"{path}: no such store (give --db PATH of an existing .sqlite file)")
    try:
        return sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    except sqlite3.Error as exc:
        raise StoreError(f"{path}: cannot open the store read-only ({exc})") from None


def _missing(indices: list[int]) -> list[int]:
    """Shot indices absent between 0 and the highest one stored."""
    if not indices:
        return []
    present = set(indices)
    return [i for i in range(max(indices) + 1) if i not in present]


def check_store(path: str | Path, verify_checksums: bool = True) -> CheckReport:
    """Check a store file: SQLite's structure check, foreign keys, and (optionally) every sample checksum."""
    path = Path(path)
    db = _open_read_only(path)
    report = CheckReport(str(path), [], 0, [], verify_checksums)
    try:
        pragma = "integrity_check" if verify_checksums else "quick_check"
        report.sqlite_messages = [row[0] for row in db.execute(f"PRAGMA {pragma}")]
        report.foreign_key_problems = len(db.execute("PRAGMA foreign_key_check").fetchall())
        runs = {rid: RunCheck(rid, status) for rid, status in
                db.execute("SELECT run_id, exit_status FROM runs ORDER BY started_at_s")}
        indices: dict[str, list[int]] = {rid: [] for rid in runs}
        blob_sql = "samples" if verify_checksums else "NULL"
        cur = db.execute(f"SELECT run_id, shot_index, samples IS NULL, {blob_sql}, sha256 FROM shots "
                         "ORDER BY run_id, shot_index")
        for run_id, index, compacted, blob, digest in cur:
            run = runs.setdefault(run_id, RunCheck(run_id, None))
            indices.setdefault(run_id, []).append(index)
            run.shots += 1
            if compacted:
                run.compacted += 1
            elif verify_checksums and hashlib.sha256(blob).hexdigest() != digest:
                run.bad_checksums.append(index)
        for run_id, run in runs.items():
            run.missing_indices = _missing(indices.get(run_id, []))
        report.runs = list(runs.values())
    except sqlite3.DatabaseError as exc:
        report.sqlite_messages.append(f"cannot read the file: {exc}")
    finally:
        db.close()
    return report


@dataclass(frozen=True)
class CompactResult:
    shots_compacted: int
    bytes_freed: int
    runs_skipped_unanalysed: int
    file_bytes_before: int
    file_bytes_after: int
    dry_run: bool


def _file_bytes(path: Path) -> int:
    return sum(p.stat().st_size for p in (path, Path(f"{path}-wal")) if p.exists())


def compact_samples(store: Store, older_than_days: float, now_s: float, include_unanalysed: bool = False,
                    vacuum: bool = False, dry_run: bool = False) -> CompactResult:
    """Drop the raw samples of shots recorded more than older_than_days before now_s; keep everything else.

    Works in batches of COMPACT_BATCH_SHOTS shots, one transaction each, so a campaign
    writing to the same file waits at most one batch.
    """
    if older_than_days < 0:
        raise StoreError(f"{store.path}: older-than age {older_than_days} days is not allowed; must be >= 0")
    cutoff_s = now_s - older_than_days * SECONDS_PER_DAY
    analysed = "" if include_unanalysed else "AND EXISTS (SELECT 1 FROM results r WHERE r.run_id = s.run_id)"
    before = _file_bytes(store.path)
    db = store.db
    skipped = db.execute(
        "SELECT COUNT(DISTINCT run_id) FROM shots s WHERE samples IS NOT NULL AND started_at_s < ? "
        "AND NOT EXISTS (SELECT 1 FROM results r WHERE r.run_id = s.run_id)", (cutoff_s,)).fetchone()[0]
    skipped = 0 if include_unanalysed else int(skipped)
    rows = db.execute(f"SELECT rowid, length(samples) FROM shots s WHERE samples IS NOT NULL AND started_at_s < ? "
                      f"{analysed} ORDER BY rowid", (cutoff_s,)).fetchall()
    freed = sum(n for _, n in rows)
    if not dry_run:
        try:
            for start in range(0, len(rows), COMPACT_BATCH_SHOTS):
                batch = [(rowid,) for rowid, _ in rows[start:start + COMPACT_BATCH_SHOTS]]
                db.execute("BEGIN IMMEDIATE")
                try:
                    db.executemany("UPDATE shots SET samples = NULL WHERE rowid = ?", batch)
                except BaseException:
                    db.execute("ROLLBACK")
                    raise
                db.execute("COMMIT")
            detail = {"older_than_days": older_than_days, "cutoff_s": cutoff_s, "shots": len(rows),
                      "bytes_freed": freed, "include_unanalysed": include_unanalysed, "vacuum": vacuum}
            db.execute("INSERT INTO maintenance VALUES (?, 'compact', ?)", (now_s, json.dumps(detail)))
            if vacuum:
                db.execute("VACUUM")
                db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        except sqlite3.Error as exc:
            raise StoreError(f"{store.path}: compaction stopped ({exc}); shots done so far stay compacted") from None
    return CompactResult(len(rows), freed, skipped, before, _file_bytes(store.path), dry_run)
