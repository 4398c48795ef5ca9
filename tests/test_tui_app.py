"""The terminal UI on the simulated rig, driven key by key through Textual's Pilot.

Common practice, no source: an operator console must start, watch and stop a run from the
keyboard; an emergency stop must leave the coil off from any screen; a trip stays latched
until a deliberate acknowledgement; the screen stays live while a driver blocks.
"""

from __future__ import annotations

import threading

import pytest
from scipy import constants

from controller.tui.keys import KEYS
from controller.tui.panels import format_pm
from controller.tui.latch import STATE_CLEAR, STATE_TRIPPED
from controller.tui.screens import AckScreen, HelpScreen, PlanScreen, WatchScreen
from controller.tui.widgets import PlotPane

from tests.conftest import EPOCH_NOON_UTC
from tests.tui_support import coil_is_off, edit_parameter, make_app, plan_sequence, quick_idle, start_run, wait_for

pytestmark = pytest.mark.timeout(120)


@pytest.fixture(autouse=True)
def _quick_idle(monkeypatch):
    quick_idle(monkeypatch)
BRAILLE = range(0x2801, 0x2900)


def has_braille(text: str) -> bool:
    return any(ord(c) in BRAILLE for c in text)


async def test_run_streams_shots_and_fit_then_stop_leaves_coil_off(tmp_path):
    app = make_app(tmp_path / "tui.sqlite", pace=0.05)
    async with app.run_test(size=(80, 24)) as pilot:
        await start_run(pilot, "fid-sudden", {"shots": "30"})
        state = app.state
        await wait_for(pilot, lambda: state.views is not None and state.views.shots_stacked >= 2
                       and state.fit is not None, what="two shots and a fit")
        assert state.active and state.run.shots_planned == 30
        # the field shown is f / (gamma'_p / 2 pi), source: CODATA 2022 shielded proton
        # gyromagnetic ratio via scipy.constants
        gamma_hz_per_nt = constants.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e-3
        assert state.fit.field_nt == pytest.approx(state.fit.frequency_hz / gamma_hz_per_nt, rel=1e-12)
        assert app.screen.query_one("#fit").render().plain.count("±") == 4  # f, B, T2*, SNR each with sd
        assert format_pm(state.fit.field_nt, state.fit.field_sd_nt, "nT") in app.screen.query_one("#fit").render().plain
        for pane in app.screen.query(PlotPane):
            assert has_braille(pane.render().plain), pane.id
        shots_seen = state.run.shots_done
        await pilot.press("s")
        await wait_for(pilot, lambda: state.run.exit_status != "", what="the run to end")
        assert state.run.exit_status == "stopped"
        assert shots_seen <= state.run.shots_done < 30
        assert coil_is_off(app.rig)
        assert "STOPPED" in app.screen.query_one("#status").render().plain


async def test_emergency_stop_mid_shot_from_a_dialog_leaves_coil_off(tmp_path):
    app = make_app(tmp_path / "tui.sqlite", pace=0.2)
    async with app.run_test(size=(80, 24)) as pilot:
        await start_run(pilot, "fid-sudden", {"shots": "5"})
        await pilot.press("p")  # away from the watch screen, into the editor with its text field focused
        await wait_for(pilot, lambda: isinstance(app.screen, PlanScreen), 5)
        app.screen.query_one("#params").focus()
        await pilot.press("enter")
        await wait_for(pilot, lambda: app.screen.__class__.__name__ == "EditValueScreen", 5)
        # wait until the coil is polarising in the second shot, then stop at once
        await wait_for(pilot, lambda: app.state.run is not None and app.state.run.shots_done >= 1
                       and app.state.readings.get("current_a", 0) > 1.0 and app.rig.instrument.output_on,
                       what="polarising current")
        await pilot.press("ctrl+x")
        await wait_for(pilot, lambda: app.state.run.exit_status != "", what="the run to end")
        assert app.state.run.exit_status == "stopped"
        assert "EMERGENCY" in app.state.run.reason
        assert app.state.run.shots_done < 5
        assert app.rig.instrument.output_on is False
        assert app.rig.supply.read_current() == 0.0
        assert coil_is_off(app.rig)
        assert app.session.queued() == ()


async def test_emergency_stop_when_idle_makes_the_rig_safe(tmp_path):
    app = make_app(tmp_path / "tui.sqlite")
    async with app.run_test(size=(80, 24)) as pilot:
        app.rig.supply.set_current(1.5)  # as if left on by something else
        assert app.rig.instrument.output_on
        await pilot.press("ctrl+x")
        await wait_for(pilot, lambda: any("rig made safe" in text for text, _ in app.state.log), 10)
        assert coil_is_off(app.rig)


async def test_plan_screen_refuses_what_precess_check_refuses(tmp_path):
    app = make_app(tmp_path / "tui.sqlite")
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await plan_sequence(pilot, "fid-sudden", {"polarise.current_a": "5"})
        verdict = screen.query_one("#verdict").render().plain
        assert verdict.startswith("REFUSED")
        # the message is controller.checks.check_all's, as `precess check` prints it
        assert "polarising current: 5 A exceeds the limit 3 A" in verdict
        await pilot.press("plus")
        await pilot.pause(0.05)
        assert app.session.queued() == ()
        await edit_parameter(pilot, "polarise.current_a", "two")
        assert "INVALID sequence editor: polarise.current_a: 'two' is not a number" in \
            screen.query_one("#verdict").render().plain
        await pilot.press("r")
        assert screen.query_one("#verdict").render().plain.startswith("READY")


async def test_supervisor_trip_latches_blocks_go_and_needs_the_rig_name_to_clear(tmp_path):
    app = make_app(tmp_path / "tui.sqlite", pace=0.05)
    # fault injection: from 1 s into the run the supply delivers 60 % more than its setpoint
    app.rig.instrument.faults.overshoot_at_s = EPOCH_NOON_UTC + 1.0
    async with app.run_test(size=(80, 24)) as pilot:
        session = app.session
        await start_run(pilot, "fid-sudden", {"shots": "4"})
        await wait_for(pilot, lambda: app.state.run is not None and app.state.run.exit_status != "", what="trip")
        assert app.state.run.exit_status == "interlock"
        assert app.state.latch_state == STATE_TRIPPED and session.latch.file.latched  # in the rig's latch file
        assert coil_is_off(app.rig)
        assert "TRIPPED" in app.screen.query_one("#status").render().plain
        assert "TRIPPED" in app.screen.query_one("#rig").render().plain
        app.rig.instrument.faults.overshoot_at_s = None  # the cause is fixed
        await plan_sequence(pilot, "fid-sudden", {"shots": "1"})
        await pilot.press("plus", "g")  # a latched trip keeps the queue from starting
        await pilot.pause(0.1)
        assert not session.running and session.queued()
        await pilot.press("w", "a")
        await wait_for(pilot, lambda: isinstance(app.screen, AckScreen), 5)
        await pilot.press(*"ACK", "enter")  # not the rig's name: stays latched
        await pilot.pause(0.05)
        assert isinstance(app.screen, AckScreen) and session.latch.state == STATE_TRIPPED
        await pilot.press(*app.loaded.config.name, "enter")
        await wait_for(pilot, lambda: app.state.latch_state == STATE_CLEAR, 5, "the latch to clear")
        assert isinstance(app.screen, WatchScreen) and not session.latch.file.latched
        await pilot.press("g")  # and now the queued run may start
        await wait_for(pilot, lambda: app.state.run.exit_status == "completed", what="the next run")


class BlockingTransceiver:
    """Wraps the simulated transceiver; play_and_record waits on an event first (a stuck driver)."""

    def __init__(self, inner, release: threading.Event) -> None:
        self.inner, self.release = inner, release
        self.sample_rate_hz = inner.sample_rate_hz
        self.entered = threading.Event()

    def play_and_record(self, gate, tx):
        self.entered.set()
        self.release.wait(60)
        return self.inner.play_and_record(gate, tx)

    def silence(self):
        self.inner.silence()

    def describe(self):
        return self.inner.describe()


async def test_screen_stays_live_while_a_driver_blocks(tmp_path, monkeypatch):
    monkeypatch.setattr("controller.tui.panels.HEARTBEAT_LATE_S", 0.5)
    app = make_app(tmp_path / "tui.sqlite")
    release = threading.Event()
    app.rig.transceiver = BlockingTransceiver(app.rig.transceiver, release)
    try:
        async with app.run_test(size=(80, 24)) as pilot:
            await start_run(pilot, "fid-sudden", {"shots": "2"})
            await wait_for(pilot, app.rig.transceiver.entered.is_set, what="the driver to block")
            await wait_for(pilot, lambda: "LATE" in app.screen.query_one("#rig").render().plain, 10,
                           "the heartbeat to show LATE")
            await pilot.press("question_mark")  # keys still work
            await wait_for(pilot, lambda: isinstance(app.screen, HelpScreen), 5, "the help screen")
            await pilot.press("escape", "ctrl+x")
            assert app.state.active  # the engine is still inside the driver
            release.set()
            await wait_for(pilot, lambda: app.state.run.exit_status != "", what="the run to end")
            assert app.state.run.exit_status == "stopped"
            assert coil_is_off(app.rig)
    finally:
        release.set()


async def test_quit_during_a_run_asks_then_stops_safely(tmp_path):
    app = make_app(tmp_path / "tui.sqlite", pace=0.1)
    async with app.run_test(size=(80, 24)) as pilot:
        await start_run(pilot, "fid-sudden", {"shots": "20"})
        await wait_for(pilot, lambda: app.state.readings.get("current_a", 0) > 1.0, what="current on")
        await pilot.press("q")
        await wait_for(pilot, lambda: app.screen.__class__.__name__ == "ConfirmQuitScreen", 5)
        await pilot.press("n")
        assert app.state.active
        await pilot.press("q", "y")
        await wait_for(pilot, lambda: not app.session.running, what="the engine to finish")
    assert app.state.run.exit_status == "stopped"
    assert coil_is_off(app.rig)


def _shown(key: str) -> str:
    names = {"ctrl+x": "^X", "question_mark": "?", "f1": "F1", "plus": "+", "minus": "-", "escape": "esc"}
    return names.get(key, key)


def test_help_lists_every_key_binding():
    from controller.tui.app import PrecessApp

    shown = " ".join(k for k, _, _ in KEYS)
    for owner in (PrecessApp, WatchScreen, PlanScreen):
        for binding in owner.BINDINGS:
            first = binding.key.split(",")[0]
            assert _shown(first) in shown.split() or _shown(first) in shown, (owner.__name__, binding.key)
