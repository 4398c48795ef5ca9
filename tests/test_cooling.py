"""Duty-cycle windows, checks before running and cooling pauses, on compiled timelines."""

from __future__ import annotations

import dataclasses
import threading
from pathlib import Path

import numpy as np
import pytest

from controller.checks import check_all, check_duty_cycle, check_flyback_energy, planning_limit_c, \
    predicted_peak_temperature_c
from controller.config.loader import load_rig, load_sequence
from controller.cooling import insert_cooling_pauses, plan_cooling_pauses
from controller.sequences.compile import compile_sequence
from controller.thermal_plan import current_profile, max_window_duty, on_intervals
from rig_files import write_rig, write_sequence


def compiled(tmp_path: Path, rig_overrides: dict | None = None, **sequence):
    loaded = load_rig(write_rig(tmp_path, rig_overrides))
    spec = load_sequence(write_sequence(tmp_path, **sequence))
    return loaded, compile_sequence(spec, loaded.config.transceiver.sample_rate_hz, 2000.0)


def brute_force_duty(intervals: list[tuple[float, float]], window_s: float, step_s: float = 1e-3) -> float:
    """Independent check: move the window along a fine grid of on/off samples."""
    end = intervals[-1][1] + window_s
    t = np.arange(0.0, end, step_s)
    on = np.zeros(t.size)
    for a, b in intervals:
        on[(t >= a) & (t < b)] = 1.0
    k = int(round(window_s / step_s))
    cumulative = np.concatenate([np.zeros(k), np.cumsum(on)])
    sums = (cumulative[k:] - cumulative[:-k]) * step_s  # on-time in the window ending at each sample
    return float(np.max(sums) / window_s)


@pytest.mark.parametrize("window_s", [1.0, 3.3, 10.0, 50.0])
def test_window_duty_matches_a_brute_force_scan(window_s: float) -> None:
    rng = np.random.default_rng(4)
    edges = np.cumsum(rng.uniform(0.2, 2.0, size=40))
    intervals = [(float(edges[i]), float(edges[i + 1])) for i in range(0, 40, 2)]
    duty, _ = max_window_duty(intervals, window_s)
    assert duty == pytest.approx(brute_force_duty(intervals, window_s), abs=2e-3 / window_s + 1e-9)


def test_duty_check_says_by_how_much(tmp_path: Path) -> None:
    loaded, timeline = compiled(tmp_path, {"limits": {"duty_window_s": 20.0, "max_duty_cycle": 0.5}},
                                shots=10, polarise_s=4.0, recovery_s=0.3)
    (violation,) = check_duty_cycle(timeline, loaded.config)
    intervals = on_intervals(current_profile(timeline.shots))
    expected = brute_force_duty(intervals, 20.0)
    assert violation.value == pytest.approx(expected, abs=1e-3)
    assert f"exceeds the limit 0.5 by {violation.value - 0.5:.4g} (over the 20 s ending" in str(violation)


def test_flyback_energy_check(tmp_path: Path) -> None:
    # 1/2 L I^2 at 3 A with L from Wheeler's multilayer formula for the Heron-2 winding [calc]
    from controller.physics.coil import wheeler_inductance_h
    from controller.rigmodel import coil_model

    loaded, timeline = compiled(tmp_path, {"limits": {"max_flyback_energy_j": 0.04}}, current_a=3.0)
    coil = coil_model(loaded.config.coil)
    inductance_h = wheeler_inductance_h(500, coil.mean_radius_m, 0.100, coil.winding_build_m)
    (violation,) = check_flyback_energy(timeline, loaded.config)
    assert violation.value == pytest.approx(0.5 * inductance_h * 3.0**2, rel=1e-9)
    assert violation.limit == 0.04 and f"by {violation.value - 0.04:.4g} J" in str(violation)


def test_configured_limit_must_stay_below_the_insulation_class(tmp_path: Path) -> None:
    # source: IEC 60085 class A is 105 C; 10 K hot-spot allowance (from memory, IEC 60034-1 tables)
    loaded, timeline = compiled(tmp_path, {"limits": {"max_coil_temperature_c": 100.0}})
    messages = [str(v) for v in check_all(timeline, loaded.config)]
    assert any("configured temperature limit: 100 C exceeds the limit 95 C by 5 C" in m for m in messages)


def test_cooling_pauses_are_minimal_and_sufficient(tmp_path: Path) -> None:
    loaded, timeline = compiled(tmp_path, {"coil": {"heat_capacity_j_per_k": 15.0},
                                           "limits": {"duty_window_s": 30.0, "max_duty_cycle": 0.6}},
                                shots=12, current_a=3.0, polarise_s=5.0, recovery_s=0.5)
    rig = loaded.config
    assert check_all(timeline, rig)  # too hot and too dense as planned
    plan = plan_cooling_pauses(timeline.shots, rig)
    assert plan.pauses and not plan.infeasible_shots
    paused = insert_cooling_pauses(timeline, plan.pauses)
    assert check_all(paused, rig) == []
    assert plan.peak_c == pytest.approx(predicted_peak_temperature_c(paused, rig), abs=1e-6)
    assert plan.peak_c <= planning_limit_c(rig)
    # each pause is as short as the resolution allows: 0.2 s less and the plan fails again
    for k, pause in enumerate(plan.pauses):
        shorter = list(plan.pauses)
        shorter[k] = dataclasses.replace(pause, pause_s=pause.pause_s - 0.2)
        assert check_all(insert_cooling_pauses(timeline, shorter), rig), f"pause {k} is longer than needed"


def test_a_shot_too_hot_even_when_cold_is_reported_not_paused(tmp_path: Path) -> None:
    loaded, timeline = compiled(tmp_path, {"coil": {"heat_capacity_j_per_k": 1.0}}, shots=2, current_a=3.0,
                                polarise_s=8.0)
    plan = plan_cooling_pauses(timeline.shots, loaded.config)
    assert plan.infeasible_shots == (0, 1) and plan.pauses == ()


def test_a_warm_start_needs_a_wait_before_the_first_shot(tmp_path: Path) -> None:
    loaded, timeline = compiled(tmp_path, {"coil": {"heat_capacity_j_per_k": 15.0}}, shots=2, current_a=3.0)
    plan = plan_cooling_pauses(timeline.shots, loaded.config, start_c=66.0)
    assert plan.pauses[0].before_shot == 0 and plan.pauses[0].pause_s > 0
    with pytest.raises(ValueError, match="before the first shot"):
        insert_cooling_pauses(timeline, plan.pauses)


def test_emergency_stop_makes_the_rig_safe_at_once_from_another_thread(tmp_path: Path) -> None:
    from controller.cli.supervision import supervised_engine
    from controller.clock import VirtualClock
    from controller.rig import build_rig
    from controller.supervisor.latch import TripLatch

    loaded, timeline = compiled(tmp_path, shots=3, polarise_s=5.0)
    clock = VirtualClock(pace=1.0)  # real time, so another thread can act mid-pulse
    rig = build_rig(loaded, clock)
    latch = TripLatch(loaded.config.name, tmp_path / "state")
    engine = supervised_engine(loaded, rig, clock, None, latch)
    outcome: list = []
    worker = threading.Thread(target=lambda: outcome.append(engine.run(timeline, {})))
    worker.start()
    try:
        deadline = clock.now() + 10
        while rig.instrument.coil_current_a() == 0.0 and clock.now() < deadline:
            threading.Event().wait(0.01)
        assert rig.instrument.coil_current_a() == pytest.approx(2.0)
        assert engine.emergency_stop() == []
        assert rig.instrument.coil_current_a() == 0.0 and not rig.instrument.supply_live  # at once, not a period later
    finally:
        worker.join(timeout=10)
    assert outcome[0].exit_status == "stopped" and "emergency stop" in outcome[0].reason
    assert not latch.latched  # a stop is not a trip
