"""A campaign on the simulated rig meets drop-outs, trips and a clean stop, and records why.

Faults are the simulator's own (drivers/simulated/instrument.py: a board that goes silent and
answers again, a supply that vanishes mid-run), placed on the virtual clock.  The campaign
service is the real one, with the real supervisor, trip latch and SQLite store.
"""

from __future__ import annotations

import json

import pytest

from campaign_setup import START_S, make_campaign

pytestmark = pytest.mark.timeout(60)


def events(setup) -> list[str]:
    return [json.loads(d)["event"] for (d,) in setup.query(
        "SELECT detail_json FROM maintenance WHERE action = 'campaign' ORDER BY rowid")]


def test_board_drops_out_between_runs_and_returns(tmp_path):
    setup = make_campaign(tmp_path, count=4, campaign="device_wait_s = 120.0\n")
    setup.faults.board_silent_at_s = START_S + 5.0  # after run 1, before the slot at +10 s
    setup.faults.board_silent_until_s = START_S + 37.0
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code) == ("completed", 0), outcome.reason
    runs = setup.query("SELECT started_at_s, exit_status FROM runs ORDER BY started_at_s")
    assert [status for _, status in runs] == ["completed"] * 4
    # nothing started while the board was away; the next run waited for the next slot after its return
    assert not any(START_S + 5.0 <= t < START_S + 37.0 for t, _ in runs)
    assert [round(t - START_S) for t, _ in runs] == [0, 40, 50, 60]
    (gap,) = setup.query("SELECT start_s, end_s, reason FROM gaps")
    assert gap[0] == pytest.approx(START_S + 10.0) and START_S + 37.0 <= gap[1] <= START_S + 40.0
    assert "device dropped out" in gap[2] and "board" in gap[2] and "back after" in gap[2]
    assert events(setup) == ["start", "device_lost", "device_back", "end"]
    assert not setup.latch.latched and setup.query("SELECT COUNT(*) FROM trips") == [(0,)]
    assert setup.coil_off()


def test_supply_lost_mid_run_fails_that_run_then_the_campaign_waits_and_continues(tmp_path):
    setup = make_campaign(tmp_path, count=3, campaign="device_wait_s = 600.0\n")
    setup.faults.supply_lost_at_s = START_S + 0.3  # while the first shot polarises
    setup.faults.supply_lost_until_s = START_S + 22.0
    outcome = setup.service.run()
    assert outcome.status == "completed", outcome.reason
    runs = setup.query("SELECT exit_status, reason FROM runs ORDER BY started_at_s")
    assert runs[0][0] == "failed" and "DriverError" in runs[0][1] and "gone" in runs[0][1]
    assert [status for status, _ in runs[1:]] == ["completed", "completed"]
    (gap,) = setup.query("SELECT start_s, end_s, reason FROM gaps")
    assert gap[0] < START_S + 2.0 and START_S + 22.0 <= gap[1] and "supply" in gap[2]
    assert events(setup) == ["start", "device_lost", "device_back", "end"]
    assert setup.coil_off() and not setup.latch.latched


def test_a_device_that_does_not_come_back_ends_the_campaign_after_the_configured_wait(tmp_path):
    setup = make_campaign(tmp_path, count=5, campaign="device_wait_s = 30.0\n")
    setup.faults.board_silent_at_s = START_S + 5.0
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code) == ("device-lost", 3)
    assert "not back within 30 s" in outcome.reason and outcome.runs_done == 1
    (gap,) = setup.query("SELECT start_s, end_s, reason FROM gaps")
    assert gap[1] - gap[0] == pytest.approx(30.0, abs=1e-6) and "not back within 30 s" in gap[2]
    # it kept trying every retry_every_s (5 s) for the whole wait
    assert len(setup.factory_calls) == 1 + 7
    assert setup.coil_off()
    beat = json.loads((tmp_path / "campaign.sqlite.heartbeat.json").read_text())
    assert beat["state"] == "failed" and "not back within" in beat["reason"]


def test_a_trip_mid_run_waits_for_an_operator_and_never_clears_itself(tmp_path):
    setup = make_campaign(tmp_path, count=3, campaign="ack_wait_s = 3600.0\nretry_every_s = 60.0\n")
    setup.faults.board_silent_at_s = START_S + 0.05  # while polarising: the supervisor's heartbeat trip
    setup.faults.board_silent_until_s = START_S + 1.0
    acknowledged = []
    logged = setup.service.heartbeat.on_change

    def operator(beat):
        logged(beat)
        if beat.state == "waiting-for-ack":
            assert setup.latch.latched and setup.coil_off()
            acknowledged.extend(setup.latch.acknowledge(setup.latch.rig_name, note="board lead re-seated"))

    setup.service.heartbeat.on_change = operator
    outcome = setup.service.run()
    assert outcome.status == "completed", outcome.reason
    assert [t["check"] for t in acknowledged] == ["heartbeat_lost"]
    acks = setup.latch.ack_log.read_text().splitlines()
    assert len(acks) == 1 and json.loads(acks[0])["note"] == "board lead re-seated"  # only the operator's
    runs = setup.query("SELECT exit_status FROM runs ORDER BY started_at_s")
    assert [s for (s,) in runs] == ["interlock", "completed", "completed"]
    # acknowledged at once, while the board was still away: the campaign then waited for the board
    trip_gap, device_gap = setup.query("SELECT reason, end_s FROM gaps ORDER BY start_s")
    assert "heartbeat_lost" in trip_gap[0] and "acknowledged by an operator" in trip_gap[0]
    assert "after the acknowledged trip" in device_gap[0] and device_gap[1] >= START_S + 1.0
    assert events(setup) == ["start", "trip_wait", "trip_acknowledged", "device_lost", "device_back", "end"]


def test_a_trip_without_an_operator_ends_the_campaign_with_the_trip_latched(tmp_path):
    setup = make_campaign(tmp_path, count=3)  # ack_wait_s = 0: stop at once
    setup.faults.board_silent_at_s = START_S + 0.05
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code) == ("interlock", 6)
    assert "heartbeat_lost" in outcome.reason and setup.latch.latched and setup.coil_off()
    # started again, it refuses until someone acknowledges (a schedule never clears a trip)
    again = make_campaign(tmp_path, count=3, start_s=START_S + 100.0)
    assert again.service.run().status == "interlock" and again.latch.latched
    assert again.query("SELECT COUNT(*) FROM runs") == [(1,)]


def test_a_clean_stop_is_recorded_and_a_restart_continues_the_schedule(tmp_path):
    setup = make_campaign(tmp_path, count=5)
    setup.service.on_report = lambda report: setup.service.stop("SIGTERM received") if report.occurrence == 1 else None
    outcome = setup.service.run()
    assert (outcome.status, outcome.exit_code, outcome.runs_done) == ("stopped", 0, 2)
    assert outcome.reason == "SIGTERM received"
    setup.store.close()
    later = make_campaign(tmp_path, count=5, start_s=START_S + 300.0)
    outcome = later.service.run()
    assert outcome.status == "completed" and outcome.runs_done == 5
    occurrences = later.query("SELECT json_extract(config_json, '$.schedule.occurrence') FROM runs ORDER BY started_at_s")
    assert [o for (o,) in occurrences] == [0, 1, 2, 3, 4]
    (gap,) = later.query("SELECT start_s, end_s, reason FROM gaps")
    assert gap[1] == START_S + 300.0 and "campaign stopped (stopped: SIGTERM received)" in gap[2]
