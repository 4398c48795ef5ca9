"""The trip latch, kept in a small JSON file per rig so that it outlives the process.

Where: $PRECESS_STATE_DIR, else $XDG_STATE_HOME/precess, else ~/.local/state/precess; the
file is `latch-<rig slug>.json`.  The latch belongs to the rig (the hardware), not to a data
store: switching to a new database does not clear it.  Writes are atomic (temporary file,
fsync, rename).  A latch file that cannot be read counts as latched: the safe reading.

Only `acknowledge` clears a latch, and only with the rig's name typed back as confirmation;
each acknowledgement is appended to `acks-<rig slug>.jsonl` beside it.  Nothing else in
precess (a schedule, a retry, a new run) clears it.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import time
from dataclasses import asdict
from pathlib import Path
from typing import Any

from controller.errors import PrecessError
from controller.records import InterlockTripped

ENV_STATE_DIR = "PRECESS_STATE_DIR"


class TripLatchedError(PrecessError):
    """A trip is latched on this rig: nothing is energised until an operator acknowledges it."""

    exit_code = 6


def default_state_dir() -> Path:
    if os.environ.get(ENV_STATE_DIR):
        return Path(os.environ[ENV_STATE_DIR])
    base = os.environ.get("XDG_STATE_HOME") or str(Path.home() / ".local" / "state")
    return Path(base) / "precess"


def rig_slug(rig_name: str) -> str:
    """A file-name-safe form of the rig name, with a short hash against collisions."""
    readable = re.sub(r"[^a-z0-9]+", "-", rig_name.lower()).strip("-")[:40] or "rig"
    return f"{readable}-{hashlib.sha256(rig_name.encode()).hexdigest()[:8]}"


def _utc(t: float) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%S UTC", time.gmtime(t))


class TripLatch:
    """The persistent latch of one rig."""

    def __init__(self, rig_name: str, state_dir: str | Path | None = None) -> None:
        self.rig_name = rig_name
        self.dir = Path(state_dir) if state_dir is not None else default_state_dir()
        self.path = self.dir / f"latch-{rig_slug(rig_name)}.json"
        self.ack_log = self.dir / f"acks-{rig_slug(rig_name)}.jsonl"

    # ---- reading ------------------------------------------------------------------------
    def trips(self) -> list[dict[str, Any]]:
        """The latched trips, oldest first; [] when clear.  An unreadable file is one trip."""
        try:
            text = self.path.read_text(encoding="utf-8")
        except FileNotFoundError:
            return []
        except OSError as exc:
            return [self._unreadable(f"cannot be read ({exc.strerror})")]
        try:
            data = json.loads(text)
            trips = data["trips"]
            if not isinstance(trips, list):
                raise TypeError("trips is not a list")
            return trips
        except (ValueError, KeyError, TypeError) as exc:
            return [self._unreadable(f"is damaged ({exc})")]

    def _unreadable(self, why: str) -> dict[str, Any]:
        return {"check": "latch_file", "reason": f"{self.path} {why}; inspect it, then acknowledge",
                "run_id": "", "at_s": 0.0, "values": {}}

    @property
    def latched(self) -> bool:
        return bool(self.trips())

    def describe(self) -> list[str]:
        lines = []
        for t in self.trips():
            when = _utc(t["at_s"]) if t.get("at_s") else "unknown time"
            lines.append(f"{when}  run {t.get('run_id') or '-'}  {t['check']}: {t['reason']}")
        return lines

    def require_clear(self) -> None:
        """Raise TripLatchedError (one line for the CLI) when a trip is latched."""
        trips = self.trips()
        if trips:
            last = trips[-1]
            more = f" (and {len(trips) - 1} earlier)" if len(trips) > 1 else ""
            raise TripLatchedError(
                f"rig {self.rig_name!r} has a latched trip{more}: {last['check']}: {last['reason']}; "
                f"find the cause, make the rig safe, then run `precess ack --rig RIGFILE`")

    # ---- writing ------------------------------------------------------------------------
    def latch(self, trip: InterlockTripped) -> None:
        """Add a trip (atomic write).  Raises OSError if the state directory is unwritable."""
        trips = [t for t in self.trips() if t["check"] != "latch_file"]
        trips.append(asdict(trip))
        self._write(self.path, json.dumps({"rig": self.rig_name, "trips": trips}, indent=2, sort_keys=True))

    def acknowledge(self, confirmation: str, note: str = "", at_s: float | None = None) -> list[dict[str, Any]]:
        """Clear the latch if confirmation is the rig's name; return the trips cleared."""
        if confirmation.strip() != self.rig_name:
            raise PrecessError(f"confirmation {confirmation!r} does not match the rig name {self.rig_name!r}; "
                               "the trip stays latched")
        trips = self.trips()
        if not trips:
            return []
        entry = {"acknowledged_at_s": time.time() if at_s is None else at_s, "note": note,
                 "user": os.environ.get("USER", ""), "trips": trips}
        try:
            self.dir.mkdir(parents=True, exist_ok=True)
            with open(self.ack_log, "a", encoding="utf-8") as log:
                log.write(json.dumps(entry, sort_keys=True) + "\n")
                log.flush()
                os.fsync(log.fileno())
            self.path.unlink()
        except OSError as exc:
            raise PrecessError(f"{self.dir}: cannot record the acknowledgement ({exc.strerror}); "
                               "the trip stays latched") from None
        return trips

    def _write(self, path: Path, text: str) -> None:
        self.dir.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(path.name + ".tmp")
        with open(tmp, "w", encoding="utf-8") as f:
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
