"""A campaign and a filling disk: it stops cleanly at its reserve; a write that fails stops it with the coil off.

Where the machine allows (root, mount permitted) the store lives on a real small tmpfs that
fills up; otherwise those tests are skipped and the simulator's injected faults (free space
that reads near zero; SQLite refusing to grow, a real SQLITE_FULL of the real store) still
run everywhere.
"""

from __future__ import annotations

import json
import os
import shutil
import sqlite3
import subprocess
from pathlib import Path

import pytest

from campaign_setup import START_S, make_campaign, with_supervisor
from controller.config.loader import load_rig
from controller.errors import InputError
from controller.records import ShotAcquired
from controller.store_maintenance import check_store
from sequence_rigs import DEMO_RIG

pytestmark = pytest.mark.timeout(90)


def free_mb(folder: Path) -> float:
    return shutil.disk_usage(folder).free / 1e6


def fill_to(folder: Path, free_target_mb: float, name: str = "filler.bin") -> None:
    """Write a file that leaves about free_target_mb free on folder's file system (0: until it is full)."""
    left = int((free_mb(folder) - free_target_mb) * 1e6)
    chunk = b"\0" * 65536
    with open(folder / name, "ab") as f:
        try:
            while left > 0:
                left -= f.write(chunk[:left])
                f.flush()
        except OSError:  # ENOSPC: as full as it gets
            pass


def writer_filling_to(folder: Path, free_target_mb: float):
    """run_sinks for the service: another program fills the disk right after shot 1 has been checked."""
    def sinks(prepared):
        def sink(record):
            if isinstance(record, ShotAcquired) and record.shot_index == 1:
                fill_to(folder, free_target_mb, name="other-writer.bin")
        return [sink]
    return sinks


@pytest.fixture
def small_fs(tmp_path):
    """A 24 MB tmpfs mounted for this test (skipped where mounting is not permitted)."""
    mount_point = tmp_path / "small-fs"
    mount_point.mkdir()
    if os.geteuid() != 0:
        pytest.skip("a small file system needs root to mount a tmpfs; the injected-fault tests cover the rest")
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=24m", "tmpfs", str(mount_point)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs on this machine ({done.stderr.strip() or done.returncode}); "
                    "the injected-fault tests cover the rest")
    yield mount_point
    subprocess.run(["umount", "-l", str(mount_point)], capture_output=True)


def test_free_space_below_the_reserve_stops_the_campaign_before_a_run_without_a_trip(tmp_path):
    setup = make_campaign(tmp_path, count=5)
    setup.faults.disk_full_at_s = START_S + 5.0  # the simulated host reads 0.5 MB free from here on
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code, outcome.runs_done) == ("disk-reserve", 7, 1)
    assert "0.5 MB free beside the store" in outcome.reason and "200 MB in reserve" in outcome.reason
    assert setup.coil_off() and not setup.latch.latched  # a clean stop, not an interlock trip
    beat = json.loads((tmp_path / "campaign.sqlite.heartbeat.json").read_text())
    assert beat["state"] == "stopped" and "reserve" in beat["reason"]


def test_a_failing_store_write_stops_the_campaign_with_the_coil_off_and_a_clear_message(tmp_path):
    setup = make_campaign(tmp_path, count=5)
    setup.faults.store_write_failure_at_s = START_S + 10.3  # SQLite refuses to grow, mid second run
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code) == ("interlock", 6)
    assert "store_failure" in outcome.reason and "database or disk is full" in outcome.reason
    assert setup.coil_off() and setup.latch.latched
    setup.store.close()
    assert check_store(setup.store.path).ok  # what was committed is intact


def test_a_reserve_below_the_supervisors_floor_is_refused(tmp_path):
    setup = make_campaign(tmp_path, count=1, campaign="disk_reserve_mb = 50.0\n")  # the rig's floor is 200 MB
    with pytest.raises(InputError, match=r"disk_reserve_mb = 50 is below the rig's supervisor.min_disk_free_mb"):
        setup.service.run()
    assert setup.factory_calls == []  # nothing opened, nothing energised


def test_a_filling_disk_stops_the_campaign_at_its_reserve(tmp_path, small_fs):
    loaded = with_supervisor(load_rig(DEMO_RIG), min_disk_free_mb=2.0)
    setup = make_campaign(tmp_path, count=200, campaign="disk_reserve_mb = 10.0\n", loaded=loaded,
                          store_dir=small_fs)
    fill_to(small_fs, 14.0)
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code) == ("disk-reserve", 7), outcome.reason
    assert "10 MB in reserve" in outcome.reason and outcome.runs_done >= 3
    assert free_mb(small_fs) >= 9.5 and setup.coil_off() and not setup.latch.latched
    setup.store.close()
    assert check_store(setup.store.path).ok


def test_another_writer_filling_the_disk_mid_run_stops_that_run_after_the_shot(tmp_path, small_fs):
    loaded = with_supervisor(load_rig(DEMO_RIG), min_disk_free_mb=2.0)
    setup = make_campaign(tmp_path, count=3, campaign="disk_reserve_mb = 10.0\n", loaded=loaded,
                          store_dir=small_fs, shots=6)
    setup.service.run_sinks = writer_filling_to(small_fs, 10.2)
    outcome = setup.service.run()
    assert outcome.status == "disk-reserve" and "the next shot needs" in outcome.reason
    ((status, reason),) = setup.query("SELECT exit_status, reason FROM runs")
    assert status == "stopped" and "disk reserve" in reason
    assert setup.query("SELECT COUNT(*) FROM shots") == [(3,)]  # shot 2 found the disk filled; no shot 3
    assert setup.coil_off() and not setup.latch.latched


def test_a_disk_filled_to_the_last_byte_fails_the_write_and_stops_the_campaign_with_the_coil_off(tmp_path,
                                                                                                   small_fs):
    loaded = with_supervisor(load_rig(DEMO_RIG), min_disk_free_mb=0.0)
    setup = make_campaign(tmp_path, count=3, campaign="disk_reserve_mb = 0.0\n", loaded=loaded,
                          store_dir=small_fs, shots=6)
    setup.service.run_sinks = writer_filling_to(small_fs, 0.0)  # so a store write meets the full disk
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code) == ("interlock", 6), outcome.reason
    assert "store_failure" in outcome.reason and "disk is full" in outcome.reason
    assert setup.coil_off()
    setup.store.close()
    con = sqlite3.connect(f"file:{setup.store.path}?mode=ro", uri=True)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()
