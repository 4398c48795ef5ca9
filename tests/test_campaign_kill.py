"""A campaign process killed with SIGKILL at random moments and started again with the same arguments.

Real components: the `precess campaign` subprocess on the simulated rig (virtual time), a
real SQLite file in WAL mode with synchronous=FULL, the kernel's SIGKILL.  After every kill
the heartbeat names the last shot the process reported stored; the store must hold it.
"""

from __future__ import annotations

import json
import os
import random
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from controller.store_maintenance import check_store
from sequence_rigs import DEMO_RIG, ROOT

pytestmark = pytest.mark.timeout(150)
SEED = 20260621
TRIALS = 8
RUNS = 64
SHOTS_PER_RUN = 3
SEQUENCE = (f'name = "quick-fid"\nkind = "fid"\nshots = {SHOTS_PER_RUN}\nrecovery_s = 0.1\n'
            '[polarise]\ncurrent_a = 2.0\nduration_s = 0.5\n[receive]\ndead_time_s = 0.015\nacquire_s = 0.3\n')
SCHEDULE = (f'name = "kill-test"\nsequence = "fid.toml"\nevery_s = 2.0\ncount = {RUNS}\n'
            '[campaign]\ndisk_reserve_mb = 200.0\nheartbeat_every_s = 0.5\n')


def read_json(path: Path) -> dict | None:
    try:
        return json.loads(path.read_text())
    except (FileNotFoundError, ValueError):
        return None


def wait_for_session(heartbeat: Path, proc: subprocess.Popen, timeout_s: float = 40.0) -> dict | None:
    """The first heartbeat this process wrote (None if it ended first)."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        beat = read_json(heartbeat)
        if beat is not None and beat["pid"] == proc.pid:
            return beat
        if proc.poll() is not None:
            return None
        time.sleep(0.02)
    raise AssertionError("the campaign wrote no heartbeat")


def ended_cleanly(db: Path, session: str) -> bool:
    con = sqlite3.connect(db)
    try:
        return bool(con.execute("SELECT COUNT(*) FROM maintenance WHERE json_extract(detail_json, '$.event') = 'end' "
                                "AND json_extract(detail_json, '$.session') = ?", (session,)).fetchone()[0])
    finally:
        con.close()


def test_campaign_killed_at_random_moments_resumes_without_loss_or_duplicates(tmp_path):
    (tmp_path / "fid.toml").write_text(SEQUENCE)
    (tmp_path / "schedule.toml").write_text(SCHEDULE)
    db = tmp_path / "campaign.sqlite"
    heartbeat = tmp_path / "campaign.sqlite.heartbeat.json"
    argv = [sys.executable, "-m", "controller.cli.main", "campaign", str(tmp_path / "schedule.toml"),
            "--rig", str(DEMO_RIG), "--db", str(db), "--sim-start", "2026-06-21T18:00:00Z", "--quiet",
            "--state-dir", str(tmp_path / "state")]
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    rng = random.Random(SEED)
    kills = []  # the heartbeat each killed process left: what it had reported as stored
    sessions = 0
    for _ in range(TRIALS):
        proc = subprocess.Popen(argv, cwd=tmp_path, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        if wait_for_session(heartbeat, proc) is None:
            break  # finished before we could kill it
        sessions += 1
        time.sleep(rng.uniform(0.0, 0.6))
        if proc.poll() is not None:
            break
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        beat = read_json(heartbeat)
        if ended_cleanly(db, beat["session"]):  # it had finished the schedule just before the signal
            break
        kills.append(beat)
    assert len(kills) >= TRIALS // 2, "the campaign finished before enough kills"

    final = subprocess.run(argv, cwd=tmp_path, env=env, capture_output=True, text=True, timeout=120)
    assert final.returncode == 0, final.stderr
    assert f"all {RUNS} run(s) done" in final.stdout
    assert not list(tmp_path.glob("*.tmp"))  # half-written heartbeats of killed processes are cleared

    # the database is intact: SQLite's own check and every shot's SHA-256
    report = check_store(db)
    assert report.ok, (report.sqlite_messages, [r for r in report.runs if not r.ok])
    con = sqlite3.connect(db)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"

    runs = con.execute("SELECT run_id, exit_status, reason, json_extract(config_json, '$.schedule.occurrence'), "
                       "json_extract(config_json, '$.schedule.slot_s') FROM runs ORDER BY started_at_s").fetchall()
    # the schedule resumed where it was: every occurrence once, slots strictly increasing (none run twice)
    assert [r[3] for r in runs] == list(range(RUNS))
    slots = [r[4] for r in runs]
    assert all(b > a for a, b in zip(slots, slots[1:]))
    assert all(r[1] is not None for r in runs)  # no run left open

    # no shot duplicated or half-written; every run's shots are 0..n-1 without holes
    shots: dict[str, list[int]] = {}
    for run_id, index in con.execute("SELECT run_id, shot_index FROM shots ORDER BY run_id, shot_index"):
        shots.setdefault(run_id, []).append(index)
    starts = [t for (t,) in con.execute("SELECT started_at_s FROM shots")]
    assert len(starts) == len(set(starts))
    for run_id, status, reason, _, _ in runs:
        indices = shots.get(run_id, [])
        assert indices == list(range(len(indices)))
        if status == "completed":
            assert len(indices) == SHOTS_PER_RUN
        else:  # only a kill ends a run early here
            assert status == "failed" and reason.startswith("interrupted"), reason
    interrupted = [r for r in runs if r[1] != "completed"]
    # a run killed before (or during) its analysis was analysed when the campaign resumed
    unanalysed = con.execute("SELECT run_id FROM runs r WHERE EXISTS (SELECT 1 FROM shots s WHERE s.run_id = r.run_id) "
                             "AND NOT EXISTS (SELECT 1 FROM results x WHERE x.run_id = r.run_id)").fetchall()
    assert unanalysed == []
    assert len(interrupted) <= len(kills)

    # at most the shot in flight is lost: every shot a killed process reported stored is in the store,
    # and a killed run holds at most one shot more (committed just before the kill, not yet reported)
    for beat in kills:
        last = beat.get("last_shot")
        if last is None:
            continue
        stored = shots.get(last["run_id"], [])
        assert last["shot_index"] in stored
        assert len(stored) <= last["shot_index"] + 2

    # every kill left a gap, from the last sign of life to the resume
    gaps = con.execute("SELECT run_id, start_s, end_s, reason FROM gaps ORDER BY start_s").fetchall()
    killed_gaps = [g for g in gaps if "killed or power cut" in g[3]]
    assert len(killed_gaps) == len(kills) == len(gaps)
    for beat, (run_id, start_s, end_s, _) in zip(kills, killed_gaps):
        assert beat["time_s"] <= start_s < end_s
        if run_id is not None:  # the gap belongs to the run the kill cut short
            assert run_id in {r[0] for r in interrupted}
    # every campaign session was recorded; only the last ended cleanly
    events = [json.loads(d)["event"] for (d,) in con.execute(
        "SELECT detail_json FROM maintenance WHERE action = 'campaign' ORDER BY rowid")]
    assert events.count("start") == sessions + 1 and events[-1] == "end"
    assert events.count("end") == 1 + sessions - len(kills)
    con.close()
