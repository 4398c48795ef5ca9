"""The precess terminal UI: a thin view on the engine's record stream.

The engine runs on the session's worker thread; its records (and the live analysis) reach
the app as `EngineEvent` messages through the thread-safe `post_message`, so a driver that
blocks never freezes the screen.  The app asks the session to start and stop; it never calls
a driver.  ctrl+x (emergency stop) is a priority binding: it works on every screen, in every
dialog and while typing.
"""

from __future__ import annotations

import asyncio
import collections
import signal
import threading
import time
from pathlib import Path
from typing import Any

from textual.app import App
from textual.binding import Binding
from textual.message import Message

from controller.cli.common import real_rig_caution
from controller.runner import analysis_context, predicted_larmor_hz
from controller.clock import Clock
from controller.config.loader import LoadedRig
from controller.errors import PrecessError
from controller.rig import Rig
from controller.cli.supervision import latch_for, supervised_engine
from controller.tui.latch import STATE_TRIPPED, PersistentLatch
from controller.tui.adapter import LiveStack
from controller.tui.plan import find_sequences
from controller.tui.screens import AckScreen, ConfirmQuitScreen, HelpScreen, PlanScreen, WatchScreen
from controller.tui.session import Session
from controller.tui.state import LiveState
from controller.tui.widgets import LiveWidget

TICK_HZ = 10.0
DEFAULT_MAINS_HZ = 50.0  # without a site file; mark 50 Hz harmonics


class EventsWaiting(Message):
    """Records or session events wait in the app's inbox (posted from a worker thread)."""


class PrecessApp(App):
    CSS_PATH = "app.tcss"
    TITLE = "precess"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [
        Binding("ctrl+x", "emergency_stop", "EMERGENCY STOP", priority=True),
        Binding("s", "stop", "stop"),
        Binding("g", "go", "go"),
        Binding("a", "acknowledge", "acknowledge trip"),
        Binding("p", "plan", "plan"),
        Binding("w", "watch", "watch"),
        Binding("question_mark,f1", "help", "help"),
        Binding("q,ctrl+q", "quit_safely", "quit"),
    ]

    def __init__(self, loaded: LoadedRig, rig: Rig, clock: Clock, db_path: str | Path,
                 sequences_dir: str | Path | None = None, state_dir: str | Path | None = None,
                 session_options: dict[str, Any] | None = None) -> None:
        super().__init__()
        self.loaded = loaded
        self.rig = rig
        self.clock = clock
        self.db_path = str(db_path)
        self.sequences_dir = Path(sequences_dir) if sequences_dir else default_sequences_dir(loaded)
        self.state = LiveState(rig_name=loaded.config.name, simulated=rig.simulated)
        self._inbox: collections.deque = collections.deque()
        self._inbox_lock = threading.Lock()
        self._wake_pending = False
        mains_hz = loaded.site.mains_hz if loaded.site is not None else DEFAULT_MAINS_HZ
        live_stack = LiveStack(mains_hz=mains_hz, larmor_guess_hz=predicted_larmor_hz(loaded),
                               context=analysis_context(loaded))
        latch = PersistentLatch(latch_for(loaded, str(state_dir) if state_dir is not None else None))

        def supervised(store: Any) -> Any:
            return supervised_engine(loaded, rig, clock, store, latch.file)

        options = {"latch": latch, "engine_factory": supervised, **(session_options or {})}
        self.session = Session(loaded, rig, clock, self.db_path, self._post_from_thread, live_stack=live_stack,
                               **options)
        self.state.latch_state, self.state.trip_reason = latch.state, latch.trip_reason
        self._quitting = False
        self.ended_by_signal = ""

    # ---- plumbing ------------------------------------------------------------------------
    def _post_from_thread(self, payload: Any) -> None:
        """Called on worker threads: queue the event; wake the app once per batch (never blocks)."""
        with self._inbox_lock:
            self._inbox.append(payload)
            if self._wake_pending:
                return
            self._wake_pending = True
        self.post_message(EventsWaiting())

    def on_mount(self) -> None:
        self.push_screen(WatchScreen())
        if self.state.latch_state == STATE_TRIPPED:
            self.state.say(f"latched trip: {self.state.trip_reason}", alarm=True)
        if self.rig.simulated:
            self.state.say("simulated rig: nothing is energised")
        else:
            for line in reversed(real_rig_caution(self.loaded.config, self.loaded.config.limits.max_current_a).splitlines()):
                self.state.say(line.strip(), alarm=line.startswith("CAUTION"))
        self.set_interval(1.0 / TICK_HZ, self._tick)
        if threading.current_thread() is threading.main_thread():
            loop = asyncio.get_running_loop()
            for signum, why in ((signal.SIGHUP, "the terminal hung up"), (signal.SIGTERM, "terminated")):
                loop.add_signal_handler(signum, self._end_by_signal, why)

    def _end_by_signal(self, why: str) -> None:
        """SIGHUP (e.g. a dropped SSH link) or SIGTERM: stop the run, then leave once it has ended."""
        self.ended_by_signal = why
        self.session.stop(why)
        self._quitting = True

    def on_events_waiting(self, message: EventsWaiting) -> None:
        with self._inbox_lock:
            batch = list(self._inbox)
            self._inbox.clear()
            self._wake_pending = False
        now = time.monotonic()
        parts: set[str] = set()
        for payload in batch:
            parts |= self.state.apply(payload, now)
        if parts:
            self.redraw(parts)

    def redraw(self, parts: set[str]) -> None:
        for screen in self.screen_stack:
            for widget in screen.query(LiveWidget):
                widget.state_changed(parts)

    def _tick(self) -> None:
        if self.state.active or self.session.running:
            self.redraw({"tick"})
        if self._quitting and not self.session.running:
            self.exit()

    def on_unmount(self) -> None:
        self.session.close()

    # ---- actions -------------------------------------------------------------------------
    def action_emergency_stop(self) -> None:
        self.session.emergency_stop()
        self.bell()

    def action_stop(self) -> None:
        if self.session.running:
            self.session.stop("stopped by the operator")
        else:
            self.notify("no run is active")

    def action_go(self) -> None:
        refusal = self.session.go()
        if refusal:
            self.notify(f"not started: {refusal}", severity="error")
            self.state.say(f"not started: {refusal}", alarm=True)
            self.redraw({"log"})

    def action_acknowledge(self) -> None:
        latch = self.session.latch
        if latch.state != STATE_TRIPPED:
            self.notify("nothing to acknowledge: the supervisor is clear")
            return

        def done(typed: str | None) -> None:
            if typed is None:
                return
            try:
                self.session.acknowledge(typed, "acknowledged by the operator in the terminal UI")
            except PrecessError as exc:
                self.notify(str(exc), severity="error")

        self.push_screen(AckScreen(latch.trip_reason, latch.confirmation), done)

    def action_plan(self) -> None:
        if isinstance(self.screen, PlanScreen):
            return
        if not self.is_screen_installed("plan"):
            self.install_screen(PlanScreen(find_sequences(self.sequences_dir)), name="plan")
        self.push_screen("plan")

    def action_watch(self) -> None:
        while len(self.screen_stack) > 2 and not isinstance(self.screen, WatchScreen):
            self.pop_screen()
        if isinstance(self.screen, PlanScreen):
            self.pop_screen()

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    def action_quit_safely(self) -> None:
        if not self.session.running:
            self.exit()
            return

        def done(confirmed: bool | None) -> None:
            if confirmed:
                self.session.stop("the terminal UI is closing")
                self._quitting = True
                self.state.say("stopping the run before quitting…")
                self.redraw({"log"})

        self.push_screen(ConfirmQuitScreen(), done)


def default_sequences_dir(loaded: LoadedRig) -> Path:
    """configs/sequences beside the rig's configs/rigs directory, if it exists."""
    return Path(loaded.path).resolve().parent.parent / "sequences"
