"""The supervisor as the TUI sees it: a latched trip with its reason, cleared only by an operator.

`TripLatch` is the small interface the UI needs.  `RecordLatch` latches on the records the
engine emits (an `InterlockTripped`, or a `RunFinished` whose exit status is "interlock");
`PersistentLatch` adds the rig's latch file kept by the supervisor
(controller.supervisor.latch), so a trip latched by `precess run` shows here and an
acknowledgement here is logged and clears it for every command.  Nothing but `acknowledge()`
with the rig's name typed back clears a trip, and the run queue refuses to start while one is
latched.  The UI thread reads only cached values: the file is read on the engine's thread
when a trip or the end of a run is seen, and when acknowledging.
"""

from __future__ import annotations

import threading
from typing import Any, Protocol

from controller.errors import PrecessError
from controller.records import EXIT_INTERLOCK, InterlockTripped, Record, RunFinished

STATE_CLEAR = "clear"
STATE_TRIPPED = "tripped"


class TripLatch(Protocol):
    """What the TUI reads and does with the supervisor."""

    @property
    def state(self) -> str:
        """STATE_CLEAR or STATE_TRIPPED."""

    @property
    def trip_reason(self) -> str:
        """Why it tripped ("" when clear)."""

    @property
    def confirmation(self) -> str:
        """What the operator must type to acknowledge (the rig's name)."""

    def observe(self, record: Record) -> None:
        """See every record of a run (called on the engine's thread)."""

    def acknowledge(self, confirmation: str, note: str) -> None:
        """Clear a trip; raises PrecessError (and stays latched) unless confirmation matches."""


class RecordLatch:
    """A latch fed by the engine's records; thread-safe.  Acknowledged by typing the rig's name."""

    def __init__(self, rig_name: str) -> None:
        self._lock = threading.Lock()
        self._state = STATE_CLEAR
        self._reason = ""
        self.confirmation = rig_name
        self.acknowledged: list[tuple[str, str]] = []  # (reason cleared, operator note)

    @property
    def state(self) -> str:
        with self._lock:
            return self._state

    @property
    def trip_reason(self) -> str:
        with self._lock:
            return self._reason

    def observe(self, record: Record) -> None:
        with self._lock:
            if isinstance(record, InterlockTripped):
                self._state, self._reason = STATE_TRIPPED, f"{record.check}: {record.reason}"
            elif isinstance(record, RunFinished) and record.exit_status == EXIT_INTERLOCK:
                if self._state != STATE_TRIPPED:
                    self._state, self._reason = STATE_TRIPPED, record.reason

    def acknowledge(self, confirmation: str, note: str) -> None:
        if confirmation.strip() != self.confirmation:
            raise PrecessError(f"confirmation {confirmation!r} does not match the rig name {self.confirmation!r}; "
                               "the trip stays latched")
        with self._lock:
            if self._state == STATE_TRIPPED:
                self.acknowledged.append((self._reason, note))
            self._state, self._reason = STATE_CLEAR, ""


class PersistentLatch(RecordLatch):
    """The rig's latch file (controller.supervisor.latch.TripLatch) plus the records seen."""

    def __init__(self, latch_file: Any) -> None:
        super().__init__(latch_file.rig_name)
        self.file = latch_file
        self.refresh()

    def refresh(self) -> None:
        """Latch from the file's trips (an unreadable file counts as a trip)."""
        trips = self.file.trips()
        if trips:
            last = trips[-1]
            with self._lock:
                self._state, self._reason = STATE_TRIPPED, f"{last['check']}: {last['reason']}"

    def observe(self, record: Record) -> None:
        super().observe(record)
        if isinstance(record, (InterlockTripped, RunFinished)):
            self.refresh()

    def acknowledge(self, confirmation: str, note: str) -> None:
        self.file.acknowledge(confirmation, note)  # raises, and stays latched, on a mismatch or I/O error
        super().acknowledge(confirmation, note)
