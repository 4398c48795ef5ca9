"""Shared set-up for the terminal UI tests: the demo rig on a seeded, paced virtual clock."""

from __future__ import annotations

import itertools
import time
from pathlib import Path

from controller.clock import VirtualClock
from controller.config.loader import load_rig
from controller.rig import build_rig
from controller.tui.app import PrecessApp
from controller.tui.screens import PlanScreen

from tests.conftest import CONFIGS, DEMO_RIG, EPOCH_NOON_UTC

SEQUENCES = CONFIGS / "sequences"


def make_app(db_path: Path, pace: float = 0.0, **options) -> PrecessApp:
    """The TUI on the simulated demo rig, starting at EPOCH_NOON_UTC; run ids run-0001, run-0002...

    The rig's trip latch is kept beside db_path (a fresh folder per test)."""
    loaded = load_rig(DEMO_RIG)
    clock = VirtualClock(start_epoch_s=EPOCH_NOON_UTC, pace=pace)
    rig = build_rig(loaded, clock)
    counter = itertools.count(1)
    session_options = {"new_run_id": lambda: f"run-{next(counter):04d}", **options}
    return PrecessApp(loaded, rig, clock, db_path, sequences_dir=SEQUENCES, state_dir=Path(db_path).parent / "state",
                      session_options=session_options)


async def wait_for(pilot, predicate, timeout_s: float = 30.0, what: str = "condition") -> None:
    """Poll the app (letting it process messages) until predicate() is true."""
    deadline = time.monotonic() + timeout_s
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        await pilot.pause(0.02)


async def edit_parameter(pilot, key: str, text: str) -> None:
    """On the plan screen: select the parameter row `key`, open the editor, replace the text."""
    screen = pilot.app.screen
    assert isinstance(screen, PlanScreen)
    keys = [r.key for r in screen.rows()]
    table = screen.query_one("#params")
    table.focus()
    table.move_cursor(row=keys.index(key))
    await pilot.press("enter")
    await wait_for(pilot, lambda: pilot.app.screen.__class__.__name__ == "EditValueScreen", 5, "the editor")
    await pilot.press("ctrl+u", *list(text), "enter")
    await wait_for(pilot, lambda: isinstance(pilot.app.screen, PlanScreen), 5, "the plan screen")


async def plan_sequence(pilot, name: str, edits: dict[str, str] | None = None) -> PlanScreen:
    """Open the plan screen, pick the sequence called `name`, apply edits."""
    await pilot.press("p")
    await wait_for(pilot, lambda: isinstance(pilot.app.screen, PlanScreen), 5, "the plan screen")
    screen = pilot.app.screen
    index = [s.label for s in screen.sequences].index(name)
    files = screen.query_one("#files")
    files.focus()
    files.highlighted = index
    await wait_for(pilot, lambda: screen.current is not None and screen.current.label == name, 5, name)
    for key, text in (edits or {}).items():
        await edit_parameter(pilot, key, text)
    return screen


async def start_run(pilot, name: str, edits: dict[str, str] | None = None) -> None:
    """Plan `name` with edits, queue it, go, and return to the watch screen."""
    screen = await plan_sequence(pilot, name, edits)
    assert screen.check is not None and screen.check.ready, screen.check
    await pilot.press("plus")
    await wait_for(pilot, lambda: pilot.app.session.queued(), 5, "the queue entry")
    await pilot.press("g", "w")


def coil_is_off(rig) -> bool:
    inst = rig.instrument
    return inst.output_on is False and rig.supply.read_current() == 0.0 and inst.path == "idle"


def quick_idle(monkeypatch) -> None:
    """Pilot key presses wait for the process to go idle (up to 1 s each); the simulator keeps it
    busy, so cap the wait: the tests poll for the state they expect instead."""
    import textual.app
    import textual.pilot
    from textual._wait import wait_for_idle

    async def capped(min_sleep: float = 0.0, max_sleep: float = 1.0) -> None:
        await wait_for_idle(min_sleep=min(min_sleep, 0.02), max_sleep=0.05)

    monkeypatch.setattr(textual.app, "wait_for_idle", capped)
    monkeypatch.setattr(textual.pilot, "wait_for_idle", capped)
