"""The campaign's heartbeat: what it is doing now, for a person or a monitor to read.

A small JSON file beside the store (`<store>.heartbeat.json`), rewritten atomically
(temporary file, rename) on every state change, after every stored shot and at least every
`heartbeat_every_s` of wall-clock time while it waits.  A reader never sees half a file.  It
is not fsynced (that would double the disk flushes per shot): after a power cut the store is
the record, and a heartbeat the cut damaged is ignored when the campaign resumes.  `time_s` is the campaign's clock (virtual on a simulated rig); `written_wall_s` is
the machine's clock when it was written, so a monitor judges staleness from that:

    {"state": "running", "time_s": ..., "written_wall_s": ..., "schedule": ..., "rig": ...,
     "store": ..., "pid": ..., "run_id": ..., "shot": 3, "shots_planned": 8,
     "last_shot": {"run_id": ..., "shot_index": 2, "at_s": ...}, "runs_done": 14,
     "next_slot_s": null, "reason": "", "session": ...}

The same content as one line of `key=value` words (`line()`) goes to the campaign log at
every state change and is what `precess campaign --status` prints.

States: starting, waiting (for a slot), running, device-lost, waiting-for-ack (a latched
trip), stopped, completed, failed.
"""

from __future__ import annotations

import json
import os
import time
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any, Callable

from controller.clock import Clock
from controller.errors import InputError

STATES = ("starting", "waiting", "running", "device-lost", "waiting-for-ack", "stopped", "completed", "failed")
HEARTBEAT_SUFFIX = ".heartbeat.json"


def heartbeat_path(store_path: str | Path) -> Path:
    """Where the heartbeat of the campaign writing store_path lives: beside it."""
    p = Path(store_path)
    return p.with_name(p.name + HEARTBEAT_SUFFIX)


def utc_text(t_s: float | None) -> str:
    return "-" if t_s is None else time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(t_s))


@dataclass(frozen=True)
class Beat:
    """One heartbeat; see the module docstring for the fields."""

    state: str
    time_s: float
    written_wall_s: float
    schedule: str
    rig: str
    store: str
    pid: int
    session: str
    runs_done: int = 0
    run_id: str | None = None
    shot: int | None = None
    shots_planned: int | None = None
    last_shot: dict[str, Any] | None = None
    next_slot_s: float | None = None
    reason: str = ""
    extra: dict[str, Any] = field(default_factory=dict)

    def line(self) -> str:
        """The heartbeat as one line of key=value words (values without spaces, reason last)."""
        words = [f"campaign={self.schedule.replace(' ', '_')}", f"state={self.state}", f"time={utc_text(self.time_s)}",
                 f"runs={self.runs_done}"]
        if self.run_id:
            words.append(f"run={self.run_id}")
            if self.shot is not None:
                words.append(f"shot={self.shot}/{self.shots_planned or '?'}")
        if self.last_shot:
            words.append(f"last_shot={self.last_shot['run_id']}#{self.last_shot['shot_index']}"
                         f"@{utc_text(self.last_shot['at_s'])}")
        if self.next_slot_s is not None:
            words.append(f"next={utc_text(self.next_slot_s)}")
        words.append(f"pid={self.pid}")
        if self.reason:
            words.append(f"reason={self.reason!r}")
        return " ".join(words)


def write_beat(path: Path, beat: Beat) -> None:
    """Write atomically: a reader sees the old beat or the new one, never a mix.  Raises OSError."""
    tmp = path.with_name(path.name + f".{beat.pid}.tmp")
    tmp.write_text(json.dumps(asdict(beat), sort_keys=True, default=str), encoding="utf-8")
    os.replace(tmp, path)


def remove_stale_temporaries(path: Path) -> None:
    """Delete half-written heartbeats a killed process left beside path (`<name>.<pid>.tmp`)."""
    for stale in path.parent.glob(path.name + ".*.tmp"):
        try:
            stale.unlink()
        except OSError:
            pass


def read_beat(path: Path, strict: bool = True) -> Beat | None:
    """The last heartbeat written at path, or None if there is none.

    A file that is not a heartbeat raises InputError, or (strict=False, when resuming after a
    power cut that may have damaged it) counts as no heartbeat.
    """
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        return Beat(**data)
    except FileNotFoundError:
        return None
    except (OSError, ValueError, TypeError) as exc:
        if not strict:
            return None
        raise InputError(f"{path}: not a campaign heartbeat ({exc})") from None


class Heartbeat:
    """Keeps the current beat and writes it: at once on a state change, else at most every interval_s (wall)."""

    def __init__(self, path: Path, first: Beat, interval_s: float, wall: Callable[[], float] = time.time,
                 on_change: Callable[[Beat], None] = lambda beat: None,
                 on_error: Callable[[OSError], None] = lambda exc: None) -> None:
        self.path = path
        self.beat = first
        self.interval_s = interval_s
        self.wall = wall
        self.on_change = on_change
        self.on_error = on_error
        self._written_at = -float("inf")
        self.failed_writes = 0

    def update(self, now_s: float, force: bool = False, **changes: Any) -> None:
        """Change fields of the beat (a new `state` is always written and reported) and write if due."""
        changed_state = "state" in changes and changes["state"] != self.beat.state
        self.beat = replace(self.beat, time_s=now_s, **changes)
        if changed_state:
            self.on_change(self.beat)
        if changed_state or force or self.wall() - self._written_at >= self.interval_s:
            self._write()

    def tick(self, now_s: float) -> None:
        """Called whenever time passes: writes only when the interval is up."""
        if self.wall() - self._written_at >= self.interval_s:
            self.beat = replace(self.beat, time_s=now_s)
            self._write()

    def _write(self) -> None:
        wall = self.wall()
        self.beat = replace(self.beat, written_wall_s=wall)
        self._written_at = wall
        try:
            write_beat(self.path, self.beat)
        except OSError as exc:  # a full disk must not stop the campaign from making the rig safe
            self.failed_writes += 1
            self.on_error(exc)


class TickingClock:
    """The campaign's clock: the injected one, telling the heartbeat whenever time passes."""

    def __init__(self, clock: Clock, on_tick: Callable[[float], None]) -> None:
        self.inner = clock
        self.on_tick = on_tick

    def now(self) -> float:
        return self.inner.now()

    def sleep(self, duration_s: float) -> None:
        self.inner.sleep(duration_s)
        self.on_tick(self.inner.now())
