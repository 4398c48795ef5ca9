"""Clocks injected into the engine and the simulator.

`WallClock` is real time.  `VirtualClock` advances only when something sleeps on it, so a
simulated run goes as fast as the computation allows; with pace > 0 it also waits
real time (pace 1.0 = real time, for rehearsals).
"""

from __future__ import annotations

import threading
import time
from typing import Protocol


class Clock(Protocol):
    def now(self) -> float:
        """Seconds since the Unix epoch (UTC)."""

    def sleep(self, duration_s: float) -> None:
        """Let duration_s pass."""


class WallClock:
    def now(self) -> float:
        return time.time()

    def sleep(self, duration_s: float) -> None:
        if duration_s > 0:
            time.sleep(duration_s)


class VirtualClock:
    """Simulated time starting at start_epoch_s; sleep() advances it (and waits duration*pace for real)."""

    def __init__(self, start_epoch_s: float | None = None, pace: float = 0.0) -> None:
        self._now = time.time() if start_epoch_s is None else float(start_epoch_s)
        self.pace = pace
        self._lock = threading.Lock()

    def now(self) -> float:
        with self._lock:
            return self._now

    def sleep(self, duration_s: float) -> None:
        if duration_s <= 0:
            return
        if self.pace > 0:
            time.sleep(duration_s * self.pace)
        with self._lock:
            self._now += duration_s
