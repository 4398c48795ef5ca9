"""Store schema versions, the measurements time series, and what a resuming campaign needs.

Common practice, no source: a versioned schema upgraded in place, one transaction per step.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3

import numpy as np
import pytest

from controller.errors import StoreError
from controller.records import RunStarted, ShotAcquired
from controller.store import SCHEMA, Store
from controller.store_migrations import SCHEMA_VERSION
from controller.store_queries import Selection, measurements, recorded_gaps, run_ids

from tests.conftest import EPOCH_NOON_UTC
from tests.store_data import copy_store


def _v1_file(path, fs=48000.0):
    """A store as the first release wrote it: version-1 tables, one run of two shots, one result."""
    db = sqlite3.connect(path)
    db.executescript(SCHEMA)
    db.execute("INSERT INTO meta VALUES ('schema_version', '1')")
    db.execute("INSERT INTO runs (run_id, started_at_s, sequence_name, sequence_kind, shots_planned, sample_rate_hz, "
               "simulated, software_version, config_json) VALUES ('old', 100.0, 'fid', 'fid', 2, ?, 1, '0.0', '{}')",
               (fs,))
    blob = np.zeros((1, 96000), "<f4").tobytes()
    for i, start in enumerate((100.0, 110.0)):
        db.execute("INSERT INTO shots VALUES ('old',?,?,?,?,1,96000,?,?,0,48000,48000,0.015,0,0,'[]')",
                   (i, start, fs, json.dumps(["signal"]), blob, hashlib.sha256(blob).hexdigest()))
    db.execute("INSERT INTO results VALUES ('old', 120.0, 'fid', ?)",
               (json.dumps({"shots": 2, "field_nt": 48000.5, "field_sd_nt": 0.1, "snr": 12.0,
                            "gamma_hz_per_nt": 0.04257638543}),))
    db.commit()
    db.close()


def test_new_store_is_at_the_latest_version(tmp_path):
    with Store(tmp_path / "new.sqlite") as store:
        assert store.schema_version_before == 0
        version = store.db.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()[0]
        tables = {r[0] for r in store.db.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    assert int(version) == SCHEMA_VERSION == 2
    assert {"measurements", "gaps", "maintenance"} <= tables


def test_version_1_file_is_upgraded_and_its_result_becomes_a_measurement(tmp_path):
    path = tmp_path / "v1.sqlite"
    _v1_file(path)
    with Store(path) as store:
        assert store.schema_version_before == 1
        series = measurements(store, Selection())
        shots = list(store.shots("old"))
    assert len(shots) == 2  # the old data are untouched
    assert series["field_nt"].tolist() == [48000.5]
    # reading time: mean of the acquisition-window centres, start + (48000 + 24000) / 48000 s
    assert series["at_s"][0] == pytest.approx((100.0 + 110.0) / 2 + 1.5)
    assert (series["first_shot"][0], series["last_shot"][0], series["n_shots"][0]) == (0, 1, 2)
    with Store(path) as again:  # opening again changes nothing
        assert again.schema_version_before == SCHEMA_VERSION
        assert len(measurements(again, Selection())["at_s"]) == 1


def test_file_from_a_newer_release_is_refused_untouched(tmp_path):
    path = tmp_path / "future.sqlite"
    Store(path).close()
    with sqlite3.connect(path) as db:
        db.execute("UPDATE meta SET value='99' WHERE key='schema_version'")
    before = path.read_bytes()
    with pytest.raises(StoreError, match="schema version 99, newer"):
        Store(path)
    assert path.read_bytes() == before


def _shot(run_id, index, t):
    samples = np.zeros((2, 480), dtype=np.float32)
    return ShotAcquired(run_id=run_id, shot_index=index, started_at_s=t, sample_rate_hz=48000.0,
                        channel_names=("signal", "reference"), samples=samples, switch_off_sample=0,
                        acquire_start_sample=48, acquire_samples=400, dead_time_s=0.001, latency_samples=0)


def test_resume_helpers_find_the_last_shot_close_the_run_and_record_the_gap(tmp_path):
    with Store(tmp_path / "killed.sqlite") as store:
        store.write(RunStarted("r1", EPOCH_NOON_UTC, "fid", "fid", 10, 48000.0, {}, "0.1.0", True))
        for i in range(3):
            store.write(_shot("r1", i, EPOCH_NOON_UTC + 5.0 * i))
        # the process is killed here: no RunFinished
        assert store.unfinished_runs() == ["r1"]
        assert store.last_shot("r1") == (2, EPOCH_NOON_UTC + 10.0)
        assert store.last_shot("nothing") is None
        store.close_unfinished_run("r1", "process ended without an end record (killed or power loss)")
        store.record_gap("r1", EPOCH_NOON_UTC + 10.0, EPOCH_NOON_UTC + 70.0, "restarted after a kill")
        assert store.unfinished_runs() == []
        (run,) = store.runs()
        gaps = recorded_gaps(store, Selection(from_s=EPOCH_NOON_UTC + 60.0))
    assert run["exit_status"] == "failed" and run["shots_completed"] == 3
    assert run["finished_at_s"] == EPOCH_NOON_UTC + 10.0
    assert [(g["start_s"], g["end_s"], g["reason"]) for g in gaps] == [
        (EPOCH_NOON_UTC + 10.0, EPOCH_NOON_UTC + 70.0, "restarted after a kill")]


def test_gap_ending_before_it_starts_is_refused(tmp_path):
    with Store(tmp_path / "g.sqlite") as store, pytest.raises(StoreError, match="before it starts"):
        store.record_gap(None, 10.0, 5.0, "x")


def test_run_result_is_a_measurement_at_the_centre_of_its_acquisitions(two_run_template, tmp_path):
    path, run_a, run_b = two_run_template
    with Store(copy_store(path, tmp_path / "s.sqlite")) as store:
        series = measurements(store, Selection())
        (result_a,) = store.results(run_a)
        centres = [s.started_at_s + (s.acquire_start_sample + s.acquire_samples / 2) / s.sample_rate_hz
                   for s in store.shots(run_a)]
        assert run_ids(store, Selection(from_s=EPOCH_NOON_UTC + 300.0)) == [run_b]
    assert series["run_id"].tolist() == [run_a, run_b]
    assert series["field_nt"][0] == result_a["field_nt"]
    assert series["at_s"][0] == pytest.approx(np.mean(centres))
    assert series["source"].tolist() == ["run", "run"]


def test_per_shot_readings_replace_the_run_reading_in_the_series(two_run_template, tmp_path):
    from controller.remeasure import remeasure

    path, run_a, run_b = two_run_template
    with Store(copy_store(path, tmp_path / "s.sqlite")) as store:
        summary = remeasure(store, Selection(run_id=run_a), 1, EPOCH_NOON_UTC + 3600)
        series = measurements(store, Selection())
        again = remeasure(store, Selection(run_id=run_a), 2, EPOCH_NOON_UTC + 3600)
        regrouped = measurements(store, Selection(run_id=run_a))
    assert summary == [(run_a, 4, 0)]
    assert series["run_id"].tolist() == [run_a] * 4 + [run_b]
    assert series["first_shot"][:4].tolist() == [0, 1, 2, 3]
    assert np.all(np.diff(series["at_s"]) > 0)
    assert again == [(run_a, 2, 0)] and regrouped["n_shots"].tolist() == [2, 2]
