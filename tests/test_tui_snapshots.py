"""SVG snapshots of the TUI's main screens (pytest-textual-snapshot; textual's version is pinned).

The data are deterministic: the simulated rig is seeded, its virtual clock starts at
EPOCH_NOON_UTC and run ids are numbered.  Update after a deliberate change with
`pytest tests/test_tui_snapshots.py --snapshot-update`, then look at the SVGs.
"""

from __future__ import annotations

import pytest

from controller.tui.screens import AckScreen, HelpScreen

from tests.conftest import EPOCH_NOON_UTC
from tests.tui_support import make_app, plan_sequence, quick_idle, start_run, wait_for

pytestmark = pytest.mark.timeout(120)


@pytest.fixture(autouse=True)
def _quick_idle(monkeypatch):
    quick_idle(monkeypatch)


def after_runs(app, runs: int = 1, shots: int = 3, keys: tuple[str, ...] = ()):
    """run_before: queue `runs` runs of fid-sudden with `shots` shots, go, wait for the final views."""

    async def run_before(pilot) -> None:
        await plan_sequence(pilot, "fid-sudden", {"shots": str(shots)})
        for _ in range(runs):
            await pilot.press("plus")
        await wait_for(pilot, lambda: len(app.session.queued()) == runs, 5, "the queue")
        await pilot.press("g", "w")
        state = app.state

        def finished() -> bool:
            return (len(state.history) == runs and state.run is not None and state.run.exit_status == "completed"
                    and not app.session.running and state.views is not None
                    and state.views.shots_stacked == shots and state.views.run_id == state.run.run_id)

        await wait_for(pilot, finished, 60, "the runs to finish")
        await pilot.press(*keys)
        await pilot.pause(0.1)

    return run_before


def test_watch_after_a_run_80x24(snap_compare, tmp_path):
    app = make_app(tmp_path / "s.sqlite")
    assert snap_compare(app, terminal_size=(80, 24), run_before=after_runs(app))


def test_watch_without_colour_80x24(snap_compare, tmp_path, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")  # textual then draws in monochrome
    app = make_app(tmp_path / "s.sqlite")
    assert snap_compare(app, terminal_size=(80, 24), run_before=after_runs(app))


def test_watch_stack_and_history_120x40(snap_compare, tmp_path):
    app = make_app(tmp_path / "s.sqlite")
    assert snap_compare(app, terminal_size=(120, 40), run_before=after_runs(app, runs=2, shots=2, keys=("v", "h")))


def test_plan_screen_80x24(snap_compare, tmp_path):
    app = make_app(tmp_path / "s.sqlite")

    async def run_before(pilot) -> None:
        await plan_sequence(pilot, "fid-sudden", {"polarise.current_a": "3.5"})

    assert snap_compare(app, terminal_size=(80, 24), run_before=run_before)


def test_trip_acknowledgement_dialog_80x24(snap_compare, tmp_path):
    app = make_app(tmp_path / "s.sqlite")
    app.rig.instrument.faults.open_coil_at_s = EPOCH_NOON_UTC + 1.0  # the coil circuit breaks mid-pulse

    async def run_before(pilot) -> None:
        await start_run(pilot, "fid-sudden", {"shots": "2"})
        await wait_for(pilot, lambda: app.state.run is not None and app.state.run.exit_status == "interlock"
                       and not app.session.running, 30, "the trip")
        await pilot.press("a")
        await wait_for(pilot, lambda: isinstance(app.screen, AckScreen), 5, "the dialog")

    assert snap_compare(app, terminal_size=(80, 24), run_before=run_before)


def test_help_screen_80x24(snap_compare, tmp_path):
    app = make_app(tmp_path / "s.sqlite")

    async def run_before(pilot) -> None:
        await pilot.press("question_mark")
        await wait_for(pilot, lambda: isinstance(app.screen, HelpScreen), 5, "help")

    assert snap_compare(app, terminal_size=(80, 24), run_before=run_before)


def test_history_during_a_fid_run_without_colour_80x24(snap_compare, tmp_path, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")  # the field after each shot must read without colour at 80x24
    app = make_app(tmp_path / "s.sqlite")
    assert snap_compare(app, terminal_size=(80, 24), run_before=after_runs(app, shots=4, keys=("h",)))
