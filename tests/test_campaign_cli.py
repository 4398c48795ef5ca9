"""`precess campaign` from the command line: heartbeat, status line, rotating log, one campaign per store, SIGTERM."""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import subprocess
import sys
import time

import pytest

from campaign_setup import write_schedule
from controller.campaign.heartbeat import Beat, write_beat
from controller.cli.cmd_campaign import store_lock
from controller.cli.main import main
from sequence_rigs import DEMO_RIG, ROOT

pytestmark = pytest.mark.timeout(60)


def argv(tmp_path, schedule, *more):
    return ["campaign", str(schedule), "--rig", str(DEMO_RIG), "--db", str(tmp_path / "c.sqlite"),
            "--sim-start", "2026-06-21T18:00:00Z", "--state-dir", str(tmp_path / "state"), *more]


def test_heartbeat_status_line_and_rotating_log(tmp_path, capsys):
    schedule = write_schedule(tmp_path, count=6, campaign="log_max_kb = 1\nlog_backups = 2\n")
    assert main(argv(tmp_path, schedule, "--quiet")) == 0
    out = capsys.readouterr().out
    assert "campaign 'svc-test' completed: all 6 run(s) done (6 run(s) in all, 12 shot(s) in this session)" in out

    beat = json.loads((tmp_path / "c.sqlite.heartbeat.json").read_text())
    assert beat["state"] == "completed" and beat["runs_done"] == 6 and beat["pid"] == os.getpid()
    assert beat["last_shot"]["shot_index"] == 1 and beat["time_s"] >= beat["last_shot"]["at_s"]
    assert abs(beat["written_wall_s"] - time.time()) < 60  # wall clock, unlike the virtual time_s
    assert beat["time_s"] < 1_782_070_000  # 2026-06-21 on the virtual clock

    assert main(["campaign", "--status", "--db", str(tmp_path / "c.sqlite")]) == 1  # not alive: it completed
    line = capsys.readouterr().out.strip()
    assert line.startswith("campaign=svc-test state=completed time=2026-06-21T18:") and "runs=6" in line
    assert "last_shot=" in line and "written=" in line

    # the log rotated at 1 kB, keeping two old files
    logs = sorted(p.name for p in tmp_path.glob("c.sqlite.campaign.log*"))
    assert logs == ["c.sqlite.campaign.log", "c.sqlite.campaign.log.1", "c.sqlite.campaign.log.2"]
    assert all((tmp_path / name).stat().st_size <= 1000 + 400 for name in logs)
    assert "state=completed" in (tmp_path / "c.sqlite.campaign.log").read_text()


def test_status_of_a_live_campaign_and_of_none(tmp_path, capsys):
    db = tmp_path / "c.sqlite"
    assert main(["campaign", "--status", "--db", str(db)]) == 2  # no heartbeat: one clear line
    assert "no heartbeat" in capsys.readouterr().err
    write_beat(tmp_path / "c.sqlite.heartbeat.json", Beat(
        state="running", time_s=1_782_064_800.0, written_wall_s=time.time(), schedule="night watch", rig="heron-2",
        store=str(db), pid=4242, session="s1", runs_done=3, run_id="abc", shot=2, shots_planned=8))
    assert main(["campaign", "--status", "--db", str(db)]) == 0
    assert "campaign=night_watch state=running time=2026-06-21T18:00:00Z runs=3 run=abc shot=2/8 pid=4242" in \
        capsys.readouterr().out
    assert main(["campaign", "--status", "--db", str(db), "--stale-after", "-1"]) == 1  # too old counts as dead


def test_one_campaign_per_store(tmp_path, capsys):
    schedule = write_schedule(tmp_path, count=1)
    with store_lock(str(tmp_path / "c.sqlite")):
        assert main(argv(tmp_path, schedule)) == 2
    assert f"another campaign is writing this store (pid {os.getpid()})" in capsys.readouterr().err
    assert main(["campaign", "--db", str(tmp_path / "c.sqlite")]) == 2
    assert "needs a schedule file and --rig" in capsys.readouterr().err


def test_sigterm_stops_the_campaign_cleanly(tmp_path):
    schedule = write_schedule(tmp_path, count=10_000, every_s=5.0, shots=4)
    heartbeat = tmp_path / "c.sqlite.heartbeat.json"
    proc = subprocess.Popen([sys.executable, "-m", "controller.cli.main", *argv(tmp_path, schedule, "--quiet")],
                            cwd=tmp_path, env={**os.environ, "PYTHONPATH": str(ROOT)},
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 40
    while time.monotonic() < deadline:
        try:
            if json.loads(heartbeat.read_text()).get("runs_done", 0) >= 2:
                break
        except (FileNotFoundError, ValueError):
            pass
        time.sleep(0.05)
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=30)
    assert proc.returncode == 0, err
    assert "stopped: SIGTERM received" in out and "the rig was left safe" in out
    assert json.loads(heartbeat.read_text())["state"] == "stopped"
    con = sqlite3.connect(tmp_path / "c.sqlite")
    assert con.execute("SELECT COUNT(*) FROM runs WHERE exit_status IS NULL").fetchone()[0] == 0
    last = json.loads(con.execute("SELECT detail_json FROM maintenance ORDER BY rowid DESC LIMIT 1").fetchone()[0])
    assert last["event"] == "end" and last["status"] == "stopped"
    con.close()


def test_the_demo_night_campaign_is_one_reading_a_minute_from_dusk_to_dawn():
    from datetime import datetime, timezone

    from controller.config.schedule import load_schedule
    from controller.schedule.plan import upcoming_slots

    schedule = load_schedule(ROOT / "configs" / "schedules" / "kestrel-flats-night-campaign.toml")
    start = datetime(2026, 6, 21, 17, 55, tzinfo=timezone.utc).timestamp()
    slots = upcoming_slots(schedule, start, 1000)
    assert len(slots) == 720 and schedule.config.campaign.disk_reserve_mb >= 200.0
    first, last = (datetime.fromtimestamp(t, timezone.utc).strftime("%d %H:%M") for t in (slots[0], slots[-1]))
    assert (first, last) == ("21 18:00", "22 05:59")
