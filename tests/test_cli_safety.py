"""The safety path through the command line: refusals with numbers, the latch and `ack`, stopping.

Real components: the `precess` entry point in-process (and once as a subprocess for
SIGTERM), SQLite stores and latch files in a temporary folder.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from controller.cli.main import main
from rig_files import write_rig, write_sequence


@pytest.fixture(autouse=True)
def state_dir(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    folder = tmp_path / "state"
    monkeypatch.setenv("PRECESS_STATE_DIR", str(folder))
    return folder


def test_check_refuses_an_overheating_run_with_the_predicted_temperature(tmp_path: Path, capsys) -> None:
    rig = write_rig(tmp_path, {"coil": {"heat_capacity_j_per_k": 15.0}})
    seq = write_sequence(tmp_path, shots=8, current_a=3.0, polarise_s=5.0)
    assert main(["check", str(seq), "--rig", str(rig)]) == 5
    out = capsys.readouterr().out
    assert "predicted coil temperature:" in out and "exceeds the limit 68 C by" in out
    assert main(["run", str(seq), "--rig", str(rig), "--db", str(tmp_path / "db.sqlite")]) == 5
    err = capsys.readouterr().err
    assert "refused: predicted coil temperature" in err
    assert not (tmp_path / "db.sqlite").exists()  # nothing ran, nothing energised


def test_cooling_pauses_make_the_same_run_acceptable(tmp_path: Path, capsys) -> None:
    rig = write_rig(tmp_path, {"coil": {"heat_capacity_j_per_k": 15.0}})
    seq = write_sequence(tmp_path, shots=8, current_a=3.0, polarise_s=5.0)
    code = main(["run", str(seq), "--rig", str(rig), "--db", str(tmp_path / "db.sqlite"), "--cooling-pauses"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "completed: all 8 shot(s)" in out


def test_a_trip_latches_until_acknowledged_with_the_rig_name(tmp_path: Path, capsys) -> None:
    # The same rig (same name) first with an impossible free-space floor: it trips at once.
    tripping = write_rig(tmp_path, {"supervisor": {"min_disk_free_mb": 1e12}}, name="tripping.toml")
    normal = write_rig(tmp_path, name="normal.toml")
    seq = write_sequence(tmp_path, shots=2)
    db = tmp_path / "db.sqlite"
    assert main(["run", str(seq), "--rig", str(tripping), "--db", str(db)]) == 3
    assert "TRIP low_disk_space" in capsys.readouterr().out
    with sqlite3.connect(db) as con:
        assert con.execute("SELECT check_name FROM trips").fetchall() == [("low_disk_space",)]
        assert con.execute("SELECT exit_status FROM runs").fetchall() == [("interlock",)]

    assert main(["run", str(seq), "--rig", str(normal), "--db", str(db)]) == 6  # latched: refused
    assert "latched trip: low_disk_space" in capsys.readouterr().err
    assert main(["ack", "--rig", str(normal), "--confirm", "someone else"]) == 2
    assert "does not match" in capsys.readouterr().err
    assert main(["ack", "--rig", str(normal)]) == 2  # no terminal, no --confirm: nothing cleared
    assert main(["run", str(seq), "--rig", str(normal), "--db", str(db)]) == 6

    assert main(["ack", "--rig", str(normal), "--confirm", "heron-2 (simulated)", "--note", "test"]) == 0
    assert "acknowledged 1 trip(s)" in capsys.readouterr().out
    assert main(["run", str(seq), "--rig", str(normal), "--db", str(db)]) == 0
    assert main(["ack", "--rig", str(normal), "--show"]) == 0
    assert "no trip latched" in capsys.readouterr().out


def test_a_damaged_latch_file_counts_as_latched(tmp_path: Path, state_dir: Path, capsys) -> None:
    from controller.supervisor.latch import TripLatch

    rig = write_rig(tmp_path)
    latch = TripLatch("heron-2 (simulated)", state_dir)
    state_dir.mkdir()
    latch.path.write_text("{ not json")
    assert main(["run", str(write_sequence(tmp_path)), "--rig", str(rig), "--db", str(tmp_path / "db.sqlite")]) == 6
    assert "latch_file" in capsys.readouterr().err


def test_sigterm_makes_the_rig_safe_and_records_the_stop(tmp_path: Path, state_dir: Path) -> None:
    rig = write_rig(tmp_path)
    seq = write_sequence(tmp_path, shots=50)
    db = tmp_path / "db.sqlite"
    env = dict(os.environ, PRECESS_STATE_DIR=str(state_dir))
    proc = subprocess.Popen([sys.executable, "-m", "controller.cli.main", "run", str(seq), "--rig", str(rig),
                             "--db", str(db), "--realtime"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=env, cwd=Path(__file__).resolve().parent.parent)
    deadline = time.monotonic() + 60
    while not db.exists() and time.monotonic() < deadline:
        time.sleep(0.1)
    time.sleep(1.0)  # well inside the first 2 s pulse
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "the rig was made safe" in err
    with sqlite3.connect(db) as con:
        assert con.execute("SELECT exit_status, reason FROM runs").fetchone() == (
            "stopped", "interrupted by operator (Ctrl-C / SIGTERM)")
    assert not any(state_dir.glob("latch-*.json"))  # an operator's stop is not a trip


def test_real_rig_caution_names_the_energy_and_the_limits_in_force(tmp_path: Path) -> None:
    from controller.cli.common import real_rig_caution
    from controller.config.loader import load_rig
    from controller.rigmodel import coil_model

    cfg = load_rig(write_rig(tmp_path)).config
    text = real_rig_caution(cfg, 2.0)
    energy_j = 0.5 * coil_model(cfg.coil).inductance_h * 2.0**2  # 1/2 L I^2 [calc]
    assert f"up to 2 A, {energy_j:.2g} J stored" in text
    assert "Limits in force: 3 A, 70 C coil (insulation class A), duty 80% over 120 s, 2 J flyback" in text
    assert "safety.md" in text and len(text.splitlines()) <= 5  # short
