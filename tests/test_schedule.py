"""Schedules: slots on the grid inside daily windows, runs one after another, following the Larmor frequency."""

from __future__ import annotations

import json
from datetime import datetime, timezone
from pathlib import Path

import pytest

from controller.clock import VirtualClock
from controller.cli.main import main
from controller.cli.supervision import latch_for, supervised_engine
from controller.config.schedule import load_schedule
from controller.errors import ConfigError
from controller.rig import build_rig
from controller.schedule.execute import ScheduleRunner
from controller.schedule.plan import in_windows, next_slot_s, upcoming_slots
from controller.store import Store
from sequence_rigs import DEMO_RIG, ROOT, rig


def engine_for(loaded, built_rig, clock, store):
    """The supervised engine the CLI uses, with the rig's trip latch in the tests' private state folder."""
    return supervised_engine(loaded, built_rig, clock, store, latch_for(loaded, None))


def utc(text: str) -> float:
    return datetime.fromisoformat(text).replace(tzinfo=timezone.utc).timestamp()


def write(tmp_path: Path, body: str, sequence: str | None = None) -> Path:
    seq = tmp_path / "fid.toml"
    seq.write_text(sequence or 'name = "quick-fid"\nkind = "fid"\nshots = 1\nrecovery_s = 0.2\n'
                   '[polarise]\ncurrent_a = 2.0\nduration_s = 1.0\n[receive]\ndead_time_s = 0.015\nacquire_s = 0.5\n')
    path = tmp_path / "schedule.toml"
    path.write_text('name = "test-watch"\nsequence = "fid.toml"\n' + body)
    return path


def test_slots_lie_on_the_grid_aligned_to_the_clock(tmp_path):
    s = load_schedule(write(tmp_path, "every_s = 600.0\n"))
    assert next_slot_s(s, utc("2031-06-01T10:03:20")) == utc("2031-06-01T10:10:00")
    assert next_slot_s(s, utc("2031-06-01T10:10:00")) == utc("2031-06-01T10:10:00")


def test_start_until_and_count(tmp_path):
    s = load_schedule(write(tmp_path, 'every_s = 900.0\nstart = "2031-06-01T18:05:00Z"\n'
                                      'until = "2031-06-01T19:00:00Z"\ncount = 10\n'))
    slots = upcoming_slots(s, utc("2031-06-01T12:00:00"), 10)
    assert slots == [utc("2031-06-01T18:05:00") + k * 900 for k in range(4)]  # 18:05 .. 18:50; 19:05 is past until
    assert next_slot_s(s, utc("2031-06-01T18:51:00")) is None


def test_windows_over_midnight_and_in_a_time_zone(tmp_path):
    s = load_schedule(write(tmp_path, 'every_s = 3600.0\nwindows = ["22:00-02:00"]\n'))
    slots = upcoming_slots(s, utc("2031-06-01T12:00:00"), 5)
    assert [datetime.fromtimestamp(x, timezone.utc).strftime("%d %H:%M") for x in slots] == [
        "01 22:00", "01 23:00", "02 00:00", "02 01:00", "02 22:00"]
    # Europe/Vienna is UTC+2 in June (IANA tz database): a 06:00-07:00 local window is 04:00 UTC
    vienna = load_schedule(write(tmp_path, 'every_s = 1800.0\nwindows = ["06:00-07:00"]\ntimezone = "Europe/Vienna"\n'))
    assert upcoming_slots(vienna, utc("2031-06-01T00:00:00"), 2) == [utc("2031-06-01T04:00:00"),
                                                                     utc("2031-06-01T04:30:00")]
    assert in_windows(utc("2031-06-01T04:59:59"), vienna) and not in_windows(utc("2031-06-01T05:00:00"), vienna)


@pytest.mark.parametrize("body, key", [
    ("every_s = -5.0\n", "every_s"),
    ('every_s = 60.0\nwindows = ["25:00-02:00"]\n', "windows[0]"),
    ('every_s = 60.0\nwindows = ["evening"]\n', "windows[0]"),
    ('every_s = 60.0\ntimezone = "Mars/Olympus"\n', "timezone"),
    ('every_s = 60.0\nuntil = "tomorrow"\n', "until"),
    ('every_s = 60.0\nstart = "2031-06-02T00:00:00Z"\nuntil = "2031-06-01T00:00:00Z"\n', "until"),
    ('every_s = 60.0\ncount = 0\n', "count"),
])
def test_bad_schedules_get_a_clear_error(tmp_path, body, key):
    with pytest.raises(ConfigError) as info:
        load_schedule(write(tmp_path, body))
    assert f": {key}: " in str(info.value)


def test_a_schedule_runs_follows_the_larmor_frequency_and_stores_every_run(tmp_path):
    pulse_fid = ('name = "pulse-fid"\nkind = "fid"\nshots = 2\nrecovery_s = 0.2\n'
                 '[polarise]\ncurrent_a = 2.0\nduration_s = 1.5\n[switch_off]\nramp_s = 0.4\n'
                 '[pulse]\nduration_s = 0.0048\namplitude_v = 0.5\n'
                 '[phase_cycle]\nexcite_deg = [0.0, 180.0]\nreceiver_deg = [0.0, 180.0]\n'
                 '[receive]\ndead_time_s = 0.015\nacquire_s = 0.5\n')
    schedule = load_schedule(write(tmp_path, 'every_s = 1800.0\ncount = 3\nwindows = ["06:00-07:00"]\n', pulse_fid))
    loaded = rig()
    clock = VirtualClock(start_epoch_s=utc("2031-06-01T05:50:00"))
    with Store(tmp_path / "s.sqlite") as store:
        runner = ScheduleRunner(schedule, loaded, engine_for(loaded, build_rig(loaded, clock), clock, store), store, clock)
        reports = []
        runner.on_report = reports.append
        outcome = runner.run()
        assert outcome.status == "completed" and outcome.state.runs_done == 3
        # slots 06:00, 06:30, then the next day's window opens at 06:00
        assert [r.slot_s for r in reports] == [utc("2031-06-01T06:00:00"), utc("2031-06-01T06:30:00"),
                                               utc("2031-06-02T06:00:00")]
        runs = store.runs()
        assert [r["exit_status"] for r in runs] == ["completed"] * 3
        configs = [store.run(r["run_id"])["config"] for r in runs]
        assert [c["schedule"]["occurrence"] for c in configs] == [0, 1, 2]
        # the first run's pulses use the site's prediction; each later run the frequency the run before measured
        fitted = [store.results(r["run_id"])[-1]["frequency_hz"] for r in runs]
        assert configs[0]["schedule"]["larmor_source"].startswith("site")
        assert [c["schedule"]["larmor_hz"] for c in configs[1:]] == pytest.approx(fitted[:2])
        shots = list(store.shots(runs[1]["run_id"]))
        assert shots and shots[0].started_at_s >= utc("2031-06-01T06:30:00")


def test_a_failed_run_ends_the_schedule_unless_told_to_continue(tmp_path):
    for policy, expected_runs, status in (("stop", 1, "failed"), ("continue", 2, "completed")):
        schedule = load_schedule(write(tmp_path, f'every_s = 60.0\ncount = 2\non_failure = "{policy}"\n'))
        loaded = rig()
        clock = VirtualClock(start_epoch_s=utc("2031-06-01T05:50:00"))
        built = build_rig(loaded, clock)
        built.instrument.faults.transceiver_error = True
        with Store(tmp_path / f"{policy}.sqlite") as store:
            outcome = ScheduleRunner(schedule, loaded, engine_for(loaded, built, clock, store), store, clock).run()
        assert outcome.status == status and outcome.state.runs_done == expected_runs
        assert outcome.state.failures == expected_runs
        assert built.instrument.output_on is False


def test_cli_plan_and_run(tmp_path, capsys):
    path = write(tmp_path, 'every_s = 120.0\ncount = 2\n')
    assert main(["schedule", str(path), "--rig", str(DEMO_RIG), "--plan", "3"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert len(lines) == 2  # count = 2
    db = tmp_path / "cli.sqlite"
    assert main(["schedule", str(path), "--rig", str(DEMO_RIG), "--db", str(db), "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "[1]" in out and "[2]" in out and "completed: all 2 run(s) done" in out
    assert out.count("+/-") >= 2
    with Store(db) as store:
        assert len(store.runs()) == 2


def test_the_example_schedule_loads():
    s = load_schedule(ROOT / "configs" / "schedules" / "kestrel-flats-evening.toml")
    assert s.config.count == 12 and s.windows_min == ((17 * 60, 23 * 60 + 30),)
    assert json.dumps(s.config.windows)


def test_a_trip_mid_schedule_ends_it_and_stays_latched(tmp_path):
    # the supervisor trips the first run (the coil circuit opens); the schedule stops there and the
    # latch stays set for the operator: a scheduler never clears a trip
    import dataclasses

    schedule = load_schedule(write(tmp_path, 'every_s = 60.0\ncount = 3\n'))
    loaded = rig()
    loaded = dataclasses.replace(loaded, config=dataclasses.replace(loaded.config, name="heron-2 schedule trip test"))
    clock = VirtualClock(start_epoch_s=utc("2031-06-01T05:50:00"))
    built = build_rig(loaded, clock)
    built.instrument.faults.open_coil_at_s = utc("2031-06-01T05:50:00") + 0.5  # during the first run
    latch = latch_for(loaded, tmp_path / "state")
    with Store(tmp_path / "trip.sqlite") as store:
        engine = supervised_engine(loaded, built, clock, store, latch)
        outcome = ScheduleRunner(schedule, loaded, engine, store, clock).run()
        assert outcome.status == "interlock" and outcome.state.runs_done == 1
        assert [r["exit_status"] for r in store.runs()] == ["interlock"]
    assert latch.latched and built.instrument.output_on is False
    with Store(tmp_path / "trip.sqlite") as store:  # a new schedule on the tripped rig does not start
        again = ScheduleRunner(schedule, loaded, supervised_engine(loaded, build_rig(loaded, clock), clock, store, latch),
                               store, clock).run()
    assert again.status == "interlock" and again.state.runs_done == 0 and latch.latched
