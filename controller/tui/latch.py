"""The supervisor as the TUI sees it: a latched trip with its reason, cleared only by an operator.

`TripLatch` is the small interface the UI needs.  Until the rig's supervisor provides one,
`RecordLatch` latches on the records the engine emits: an `InterlockTripped`, or a
`RunFinished` whose exit status is "interlock".  Nothing but `acknowledge()` with the rig's
name typed back clears it, and the run queue refuses to start while it is tripped.
"""

from __future__ import annotations

import threading
from typing import Protocol

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
