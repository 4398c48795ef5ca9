"""Every interlock trip provoked on the simulated rig by fault injection.

For each fault: the run ends with exit status "interlock"; the coil is off at the trip,
which comes within one control period of the moment the fault became detectable; the trip
is recorded with its numbers; every shot stored before it is intact; and the next run is
refused until an operator acknowledges the latch.  Thresholds are the rig's own settings
(common practice, no source); the physics behind the readings is tested in test_thermal.py.
"""

from __future__ import annotations

import json
import math
import sqlite3
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest

from controller.cli.supervision import supervised_engine
from controller.clock import VirtualClock
from controller.config.loader import load_rig, load_sequence
from controller.engine import RunOutcome
from controller.records import EXIT_INTERLOCK, ShotAcquired
from controller.rig import build_rig
from controller.sequences.compile import compile_sequence
from controller.store import Store
from controller.supervisor.latch import TripLatch, TripLatchedError
from rig_files import write_rig, write_sequence

T0 = 1_750_000_000.0  # virtual start of every run (seconds since the epoch)
PERIOD_S = 0.1  # the default control period
MID_PULSE_OF_SHOT_1 = 3.65  # shot 0 lasts 2.62 s; shot 1 polarises from 2.62 s to 4.62 s


@dataclass
class Result:
    outcome: RunOutcome
    inst: Any
    trips: list[dict[str, Any]]  # from the store
    status: list[dict[str, Any]]  # status readings, in order, with at_s
    shots_stored: int
    shots_acquired: int  # ShotAcquired records the engine emitted
    timeline: Any
    latch: TripLatch
    run_again: Any  # () -> None: tries the same run again (must raise while latched)


def supervised_run(tmp_path: Path, faults: dict[str, float] | None = None, rig: dict | None = None,
                   shots: int = 3, warm_start_c: float | None = None, **sequence: Any) -> Result:
    """Run a short FID on the simulated rig with faults at T0 + offset (or values, for non-time keys)."""
    loaded = load_rig(write_rig(tmp_path, rig))
    spec = load_sequence(write_sequence(tmp_path, shots=shots, **sequence))
    timeline = compile_sequence(spec, loaded.config.transceiver.sample_rate_hz, 2000.0)
    latch = TripLatch(loaded.config.name, tmp_path / "state")
    db = tmp_path / "store.sqlite"

    def run_once() -> tuple[RunOutcome, Any]:
        clock = VirtualClock(start_epoch_s=T0)
        built = build_rig(loaded, clock)
        if warm_start_c is not None:
            built.instrument.coil_temperature_c = warm_start_c
        for key, value in (faults or {}).items():
            setattr(built.instrument.faults, key, T0 + value if key.endswith("_at_s") else value)
        with Store(db) as store:
            engine = supervised_engine(loaded, built, clock, store, latch)
            engine.best_effort_sinks.append(lambda r: acquired.append(r) if isinstance(r, ShotAcquired) else None)
            return engine.run(timeline, {"test": True}), built.instrument

    acquired: list[ShotAcquired] = []
    outcome, inst = run_once()
    with sqlite3.connect(db) as con:
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        trips = [{"at_s": a, "check": c, "reason": r, "values": json.loads(v)}
                 for a, c, r, v in con.execute("SELECT at_s, check_name, reason, values_json FROM trips")]
        status = [json.loads(j) | {"at_s": a} for a, j in con.execute("SELECT at_s, readings_json FROM status ORDER BY at_s")]
    with Store(db) as store:
        shots_stored = len(list(store.shots(outcome.run_id)))  # reading checks every sample checksum

    def run_again() -> None:
        run_once()

    return Result(outcome, inst, trips, status, shots_stored, len(acquired), timeline, latch, run_again)


def assert_tripped(result: Result, check: str, detectable_at_s: float, allowed_s: float = PERIOD_S,
                   from_store: bool = True) -> dict[str, Any]:
    """The common assertions; returns the trip."""
    assert result.outcome.exit_status == EXIT_INTERLOCK, result.outcome.reason
    latched = result.latch.trips()
    assert [t["check"] for t in latched] == [check], latched
    trip = latched[0]
    if from_store:
        assert [t["check"] for t in result.trips] == [check]
        assert result.trips[0]["values"] == pytest.approx(trip["values"], nan_ok=True)
    assert trip["values"] and all(math.isfinite(v) for v in trip["values"].values())
    delay = trip["at_s"] - (T0 + detectable_at_s)
    assert -1e-5 <= delay <= allowed_s + 1e-5, f"tripped {delay:.3f} s after the fault became detectable"
    inst = result.inst
    assert inst.coil_current_a() == 0.0 and not inst.output_on
    assert inst.switched_off_at_s is not None and inst.switched_off_at_s <= trip["at_s"] + 1e-9
    assert result.shots_stored == result.shots_acquired >= result.outcome.shots_completed  # no shot lost
    with pytest.raises(TripLatchedError, match=check):
        result.run_again()
    return trip


def first_sample_where(status: list[dict[str, Any]], predicate: Any) -> float:
    """Time (from T0) of the first status sample satisfying predicate."""
    for row in status:
        if predicate(row):
            return row["at_s"] - T0
    raise AssertionError("no sample satisfies the condition")


def test_open_coil(tmp_path: Path) -> None:
    result = supervised_run(tmp_path, {"open_coil_at_s": MID_PULSE_OF_SHOT_1})
    trip = assert_tripped(result, "open_coil", MID_PULSE_OF_SHOT_1)
    assert trip["values"]["voltage_v"] == pytest.approx(30.0, rel=1e-3)  # the supply at its voltage limit
    assert trip["values"]["current_a"] < 0.01
    assert result.outcome.shots_completed == 1


def test_shorted_coil(tmp_path: Path) -> None:
    result = supervised_run(tmp_path, {"shorted_coil_at_s": MID_PULSE_OF_SHOT_1})
    trip = assert_tripped(result, "shorted_coil", MID_PULSE_OF_SHOT_1)
    assert trip["values"]["resistance_ohm"] == pytest.approx(0.02, rel=1e-2)
    # REFERENCE.md worked coil: R20 = 4.36 ohm (500 turns of AWG 20, mean radius 41.65 mm), near 20 C
    assert trip["values"]["expected_ohm"] == pytest.approx(4.36, rel=0.02)


def test_over_current(tmp_path: Path) -> None:
    result = supervised_run(tmp_path, {"overshoot_at_s": MID_PULSE_OF_SHOT_1})
    trip = assert_tripped(result, "over_current", MID_PULSE_OF_SHOT_1)
    assert trip["values"]["current_a"] == pytest.approx(3.2, rel=1e-3)  # 2 A set, 60 % overshoot
    assert trip["values"]["limit_a"] == pytest.approx(3.15)


def test_stuck_supply(tmp_path: Path) -> None:
    # The gate opens the coil at switch-off; the stuck supply ignores output_off and sits at its
    # voltage limit with no load: found at the first sample settle_s after the off command.
    result = supervised_run(tmp_path, {"stuck_supply_at_s": MID_PULSE_OF_SHOT_1})
    off_command_s = first_sample_where(result.status, lambda r: r["at_s"] > T0 + 4.6 and r["commanded_current_a"] == 0)
    trip = assert_tripped(result, "readback_mismatch", off_command_s, allowed_s=0.25 + PERIOD_S)
    assert "still live" in trip["reason"]
    assert trip["values"]["voltage_v"] == pytest.approx(30.0, rel=1e-3)


def test_rising_resistance_trips_measured_temperature(tmp_path: Path) -> None:
    rig = {"supervisor": {"sensor_disagreement_k": 150.0}}  # let the resistance method speak first
    result = supervised_run(tmp_path, {"rising_resistance_at_s": MID_PULSE_OF_SHOT_1}, rig=rig)
    crossed = first_sample_where(result.status + [{"at_s": T0 + 1e9}],
                                 lambda r: r.get("resistance_temperature_c", 0) > 70.0 or r["at_s"] > T0 + 1e8)
    trip = assert_tripped(result, "measured_over_temperature", crossed - PERIOD_S, allowed_s=PERIOD_S)
    assert trip["values"]["temperature_c"] > 70.0 > trip["values"]["thermistor_c"]


def test_lost_heartbeat(tmp_path: Path) -> None:
    result = supervised_run(tmp_path, {"board_silent_at_s": MID_PULSE_OF_SHOT_1})
    trip = assert_tripped(result, "heartbeat_lost", MID_PULSE_OF_SHOT_1, allowed_s=0.3 + 2 * PERIOD_S)
    assert "coil path idle" in trip["reason"]  # the silent board could not be set idle: said so
    assert trip["values"]["silent_s"] > 0.3


def test_sagging_battery(tmp_path: Path) -> None:
    rig = {"supervisor": {"min_battery_v": 11.0}}
    result = supervised_run(tmp_path, {"battery_sag_at_s": 1.0}, rig=rig)
    crossing_s = 1.0 + (12.6 - 11.0) / 0.5  # 0.5 V/s from 12.6 V
    trip = assert_tripped(result, "low_battery", crossing_s)
    assert trip["values"]["battery_v"] == pytest.approx(11.0, abs=0.5 * PERIOD_S + 1e-9)


def test_full_disk(tmp_path: Path) -> None:
    result = supervised_run(tmp_path, {"disk_full_at_s": MID_PULSE_OF_SHOT_1})
    trip = assert_tripped(result, "low_disk_space", MID_PULSE_OF_SHOT_1)
    assert trip["values"]["disk_free_mb"] < trip["values"]["limit_mb"]


def test_store_write_failure(tmp_path: Path) -> None:
    # SQLite itself refuses to grow the file; the first write after that is the next shot.
    result = supervised_run(tmp_path, {"store_write_failure_at_s": MID_PULSE_OF_SHOT_1}, shots=4)
    shot0, shot1 = result.timeline.shots[:2]
    failed_write_s = shot0.duration_s + shot1.segment_start_s + shot1.segment_samples / result.timeline.sample_rate_hz
    trip = assert_tripped(result, "store_failure", failed_write_s, allowed_s=1e-6, from_store=False)
    assert "full" in trip["reason"]
    assert result.outcome.shots_completed == 1 and result.shots_stored == 1 and result.shots_acquired == 1
    assert trip["values"]["shots_stored"] == 1


def test_thermistor_disagrees_with_resistance(tmp_path: Path) -> None:
    result = supervised_run(tmp_path, {"thermistor_offset_at_s": MID_PULSE_OF_SHOT_1})
    trip = assert_tripped(result, "temperature_disagreement", MID_PULSE_OF_SHOT_1)
    assert trip["values"]["resistance_c"] - trip["values"]["thermistor_c"] == pytest.approx(30.0, abs=0.5)


def test_supply_compliance_as_the_coil_warms(tmp_path: Path) -> None:
    # 2.2 A into 4.33 ohm (18 C) is 9.5 V; a 10.5 V supply reaches 98 % of its limit near 38 C.
    rig = {"supervisor": {"supply_compliance_v": 10.5}, "coil": {"heat_capacity_j_per_k": 10.0}}
    result = supervised_run(tmp_path, rig=rig, shots=8, current_a=2.2)
    crossed = first_sample_where(result.status, lambda r: r["voltage_v"] >= 0.98 * 10.5 and r["commanded_current_a"] > 0)
    trip = assert_tripped(result, "supply_compliance", crossed, allowed_s=0.0)
    previous = [r for r in result.status if r["at_s"] < trip["at_s"] - 1e-9][-1]
    assert previous["voltage_v"] < 0.98 * 10.5  # the trip is at the first sample over the threshold


def test_predicted_over_temperature_trips_before_the_coil_is_hot(tmp_path: Path) -> None:
    # A plan that check_all refuses, run on the engine directly: the supervisor still stops it,
    # at the first sample of the pulse whose end it predicts above the limit.
    rig = {"coil": {"heat_capacity_j_per_k": 15.0}}
    result = supervised_run(tmp_path, rig=rig, shots=8, current_a=3.0, polarise_s=5.0)
    trip = assert_tripped(result, "predicted_over_temperature", 0.0, allowed_s=math.inf)
    assert trip["values"]["predicted_c"] > 70.0 > trip["values"]["model_c"]
    assert result.inst.coil_temperature_c < 70.0
    earlier = [r for r in result.status if r["at_s"] < trip["at_s"] - 1e-9]
    assert max(r["predicted_temperature_c"] for r in earlier) <= 70.0


def test_duty_cycle(tmp_path: Path) -> None:
    rig = {"limits": {"duty_window_s": 20.0, "max_duty_cycle": 0.8}}
    result = supervised_run(tmp_path, rig=rig, shots=8, polarise_s=4.0, recovery_s=0.3)
    crossed = first_sample_where(result.status + [{"at_s": T0 + 1e9, "duty_cycle": 1.0}],
                                 lambda r: r["duty_cycle"] > 0.8)
    trip = assert_tripped(result, "duty_cycle", crossed - PERIOD_S)
    assert trip["values"]["duty"] == pytest.approx(0.8, abs=PERIOD_S / 20.0 + 1e-9)


def test_warm_coil_is_refused_before_anything_is_energised(tmp_path: Path) -> None:
    from controller.supervisor.machine import CoilTooWarmError

    rig = {"coil": {"heat_capacity_j_per_k": 30.0}}
    with pytest.raises(CoilTooWarmError, match=r"coil is at 6\d\.\d C \(thermistor\).*over the 68 C planning limit.*cool about"):
        supervised_run(tmp_path, rig=rig, shots=2, current_a=3.0, warm_start_c=66.0)


def test_a_completed_run_latches_nothing(tmp_path: Path) -> None:
    result = supervised_run(tmp_path, shots=2)
    assert result.outcome.exit_status == "completed" and result.shots_stored == 2
    assert not result.latch.latched and result.trips == []
    assert max(r["duty_cycle"] for r in result.status) < 0.8
