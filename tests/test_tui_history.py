"""The history view (`h`) during a FID run: the running fit's field after every shot, on the
simulated rig through the Pilot.

Common practice, no source: a base-station operator watches the field against time while a run goes.
"""

from __future__ import annotations

import pytest
from scipy import constants

from controller.tui.widgets import PANE_HISTORY

from tests.tui_support import make_app, quick_idle, start_run, wait_for

pytestmark = pytest.mark.timeout(120)
SHOTS = 6


@pytest.fixture(autouse=True)
def _quick_idle(monkeypatch):
    quick_idle(monkeypatch)


async def test_history_gets_one_field_point_per_shot_during_a_fid_run(tmp_path):
    app = make_app(tmp_path / "tui.sqlite", pace=0.05)
    async with app.run_test(size=(80, 24)) as pilot:
        await start_run(pilot, "fid-sudden", {"shots": str(SHOTS)})
        await pilot.press("h")
        state = app.state
        pane = app.screen.query_one("#lower")
        await wait_for(pilot, lambda: len(state.shot_fields) >= 3, what="three shots with a fit")
        assert state.active and pane.kind == PANE_HISTORY  # still running: the trace grows while the run goes
        assert len(state.history) == 1  # one point for the run, one per shot so far
        await pilot.pause(0.1)
        title, plot = pane.title(), pane.render().plain.splitlines()
        assert title == f"history · field per shot · {state.run.run_id} ±1 sd"  # the pane's caption
        assert plot[-1].rstrip().endswith("s") and "nT" in plot[-2]  # seconds since its first shot; nT
        assert any(ord(c) in range(0x2801, 0x2900) for c in "".join(plot[:-2]))  # points in braille
        await wait_for(pilot, lambda: state.run.exit_status != "", what="the run to end")
        assert state.run.exit_status == "completed"
        await wait_for(pilot, lambda: len(state.shot_fields) == SHOTS, 10, "the last shot's analysis")
        assert [p.shot_index for p in state.shot_fields] == list(range(SHOTS))
        times = [p.at_s for p in state.shot_fields]
        assert times == sorted(times) and times[-1] > times[0]
        # each point is f / (gamma'_p / 2 pi): source: CODATA 2022 shielded proton gyromagnetic
        # ratio via scipy.constants; the last is the run's own point
        gamma_hz_per_nt = constants.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e-3
        assert state.fit.field_nt == pytest.approx(state.fit.frequency_hz / gamma_hz_per_nt, rel=1e-12)
        assert state.shot_fields[-1].field_nt == state.history[-1].field_nt == state.fit.field_nt
