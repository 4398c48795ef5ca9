"""An emulated switch/sensor board on a pseudo-terminal, implementing docs/board-protocol.md.

It behaves like the firmware that document asks for: handshake, checksums, coil paths,
the timed segment (marker or own timer), sensors and - above all - the watchdog, which puts
the coil path to idle and latches a trip when no valid frame arrived for the watchdog time.
Tests (and `precess emulate board`) talk to it through a real pty; `unplug()` closes the
master end as a vanished USB device would, `replug()` makes a new pty behind the same
stable link name, and `marker()` is the switch-off marker arriving on the trigger input.
"""

from __future__ import annotations

import os
import pty
import select
import threading
import time
import tty
from dataclasses import dataclass, field
from pathlib import Path

from controller.sequences.render import ramp_fraction
from drivers import board_protocol as bp

TICK_S = 0.001
DEFAULT_WATCHDOG_MS = 1000


@dataclass
class BoardState:
    """What the board's firmware holds; times are time.monotonic() seconds."""

    path: str = "idle"
    helloed: bool = False
    tripped: bool = False
    watchdog_ms: int = DEFAULT_WATCHDOG_MS
    last_heard_s: float = 0.0
    segment: bp.SegmentTiming | None = None
    extra_tx_us: list[tuple[int, int]] = field(default_factory=list)  # (start, length) added by SEGTX
    segment_state: str = "none"
    armed_at_s: float = 0.0
    off_at_s: float | None = None
    temperature_c: float = 18.0
    history: list[tuple[float, str, str]] = field(default_factory=list)  # (time, path, why)


class BoardEmulator:
    """See module docstring.  `fault` makes it misbehave: '', 'garbage', 'silent', 'identity', 'old-version'."""

    def __init__(self, link: str | Path, firmware: str = "emu-1.0", board_id: str = "HERON2-SB01",
                 ambient_c: float = 18.0, heating_c_per_s: float = 0.5, load_current_a: float = 2.0,
                 battery_v: float = 12.6) -> None:
        self.link = Path(link)
        self.firmware = firmware
        self.board_id = board_id
        self.ambient_c = ambient_c
        self.heating_c_per_s = heating_c_per_s
        self.load_current_a = load_current_a
        self.battery_v = battery_v
        self.fault = ""
        self.frames_seen: list[str] = []
        self.bad_frames = 0
        self._lock = threading.RLock()
        self._master: int | None = None
        self._slave: int | None = None
        self._buffer = b""
        self._stopping = threading.Event()
        self._thread: threading.Thread | None = None
        self._started_s = time.monotonic()
        self._last_tick_s = self._started_s
        self.state = BoardState(temperature_c=ambient_c, last_heard_s=self._started_s)
        self._commands = {"HELLO": self._cmd_hello, "WDOG": self._cmd_wdog, "PING": self._cmd_ping,
                          "STAT": self._cmd_stat, "CLEAR": self._cmd_clear, "PATH": self._cmd_path,
                          "SENS": self._cmd_sens, "SEG": self._cmd_seg, "SEGQ": self._cmd_segq,
                          "SEGTX": self._cmd_segtx}

    # ---- lifecycle ----------------------------------------------------------------------
    def start(self) -> "BoardEmulator":
        self.replug()
        self._thread = threading.Thread(target=self._serve, name="board-emulator", daemon=True)
        self._thread.start()
        return self

    def stop(self) -> None:
        self._stopping.set()
        if self._thread is not None:
            self._thread.join(timeout=5)
        self.unplug()

    def unplug(self) -> None:
        """The USB lead is pulled: the host's port vanishes; the board keeps running on its own."""
        with self._lock:
            for fd in (self._master, self._slave):
                if fd is not None:
                    os.close(fd)
            self._master = self._slave = None
            self._buffer = b""
            if self.link.is_symlink():
                self.link.unlink()

    def replug(self) -> None:
        """A new pty appears behind the same link name (like a udev by-id link)."""
        with self._lock:
            if self._master is not None:
                self.unplug()
            master, slave = pty.openpty()
            tty.setraw(master)
            tty.setraw(slave)
            self._master, self._slave = master, slave
            tmp = self.link.with_name(self.link.name + ".new")
            if tmp.is_symlink():
                tmp.unlink()
            tmp.symlink_to(os.ttyname(slave))
            tmp.replace(self.link)

    def power_cycle(self) -> None:
        """The board resets: coil idle, handshake needed again, trip and segment forgotten."""
        with self._lock:
            self.state = BoardState(temperature_c=self.state.temperature_c, last_heard_s=time.monotonic())
            self._set_path("idle", "power on")

    def marker(self) -> None:
        """The switch-off marker arrives on the trigger input."""
        with self._lock:
            s = self.state
            if s.segment_state == "armed" and s.segment is not None and s.segment.trigger == "marker":
                self._switch_off(time.monotonic())

    @property
    def path(self) -> str:
        with self._lock:
            return self.state.path

    def coil_current_a(self, at_s: float | None = None) -> float:
        """The modelled coil current at time.monotonic() at_s (now if None).

        load_current_a while polarising; after a segment's switch-off it falls along the
        commanded ramp, load_current_a * g(t / ramp), g from controller.sequences.render
        (linear or exponential), and is 0 once ramp_us have passed (at once if ramp_us is 0).
        An aborted segment or any other path leaves the coil off.
        """
        with self._lock:
            s = self.state
            if s.path == "polarise":
                return self.load_current_a
            if s.segment is None or s.off_at_s is None or s.segment_state not in ("running", "done"):
                return 0.0
            ramp_s = s.segment.ramp_us * 1e-6
            since_s = (time.monotonic() if at_s is None else at_s) - s.off_at_s
            if ramp_s <= 0.0 or not 0.0 <= since_s < ramp_s:
                return 0.0
            return self.load_current_a * float(ramp_fraction(s.segment.shape, since_s / ramp_s))

    def history(self) -> list[tuple[float, str, str]]:
        with self._lock:
            return list(self.state.history)

    # ---- the firmware loop -----------------------------------------------------------------
    def _serve(self) -> None:
        while not self._stopping.is_set():
            with self._lock:
                master = self._master
            data = b""
            if master is not None:
                try:
                    ready, _, _ = select.select([master], [], [], TICK_S)
                    if ready:
                        data = os.read(master, 4096)
                except OSError:
                    data = b""  # unplugged under our feet, or the host closed its end
            else:
                time.sleep(TICK_S)
            with self._lock:
                if data:
                    self._receive(data)
                self._tick(time.monotonic())

    def _receive(self, data: bytes) -> None:
        self._buffer += data
        while b"\n" in self._buffer:
            line, self._buffer = self._buffer.split(b"\n", 1)
            self._handle_line(line)
        if len(self._buffer) > bp.MAX_LINE_BYTES:
            self._buffer = b""
            self._reply(0, "ERR", "SYNTAX", "line too long")

    def _handle_line(self, line: bytes) -> None:
        try:
            frame = bp.decode(line)
        except bp.FrameError:
            self.bad_frames += 1
            self._reply(0, "ERR", "CRC", "bad frame")
            return
        if frame.kind != ">":
            self._reply(0, "ERR", "SYNTAX", "requests start with >")
            return
        self.state.last_heard_s = time.monotonic()  # any valid frame feeds the watchdog
        self.frames_seen.append(" ".join((frame.word, *frame.args)))
        if self.fault == "silent":
            return
        if self.fault == "garbage":
            self._write(b"\x00\xffnoise from the line 4%!\n")
            return
        word, args = frame.word, frame.args
        handler = self._commands.get(word)
        if handler is None:
            self._reply(frame.seq, "ERR", "UNKNOWN", word)
            return
        if word not in ("HELLO", "STAT", "PING") and not self.state.helloed:
            self._reply(frame.seq, "ERR", "HELLO", "send HELLO first")
            return
        handler(frame.seq, args)

    def _tick(self, now: float) -> None:
        s = self.state
        dt, self._last_tick_s = now - self._last_tick_s, now
        if s.path == "polarise":
            s.temperature_c += self.heating_c_per_s * dt
        else:
            s.temperature_c += (self.ambient_c - s.temperature_c) * min(1.0, dt / 60.0)
        if s.path != "idle" and now - s.last_heard_s > s.watchdog_ms / 1000.0:
            s.tripped = True
            if s.segment_state in ("armed", "running"):
                s.segment_state = "aborted"
            self._set_path("idle", "watchdog")
        if s.segment is None:
            return
        seg = s.segment
        if s.segment_state == "armed":
            if seg.trigger == "timer" and now >= s.armed_at_s + seg.hold_us * 1e-6:
                self._switch_off(s.armed_at_s + seg.hold_us * 1e-6)
            elif seg.trigger == "marker" and now > s.armed_at_s + seg.hold_us * 1e-6:
                s.segment_state = "timeout"
                self._set_path("idle", "marker timeout")
        if s.segment_state == "running" and s.off_at_s is not None:
            since_us = (now - s.off_at_s) * 1e6
            if since_us >= seg.receive_us:
                s.segment_state = "done"
                self._set_path("idle", "segment done")
            elif any(length and start <= since_us < start + length
                     for start, length in [(seg.tx_start_us, seg.tx_len_us), *s.extra_tx_us]):
                self._set_path("transmit", "segment transmit window")
            else:
                self._set_path("receive", "segment receive")

    def _switch_off(self, at_s: float) -> None:
        self.state.off_at_s = at_s
        self.state.segment_state = "running"
        self._set_path("receive", "segment switch-off")

    def _set_path(self, path: str, why: str) -> None:
        if path != self.state.path:
            self.state.path = path
            self.state.history.append((time.monotonic(), path, why))

    # ---- replies --------------------------------------------------------------------------
    def _write(self, data: bytes) -> None:
        if self._master is None:
            return
        try:
            os.write(self._master, data)
        except OSError:
            pass

    def _reply(self, seq: int, word: str, *args: object) -> None:
        self._write(bp.encode("<", seq, word, *args))

    # ---- commands (one method per request word) ---------------------------------------------
    def _cmd_hello(self, seq: int, args: tuple[str, ...]) -> None:
        major = bp.PROTOCOL_VERSION[0] + (1 if self.fault == "old-version" else 0)
        if not args or args[0].split(".")[0] != str(major):
            self._reply(seq, "ERR", "VERSION", f"board speaks {major}.x")
            return
        self.state.helloed = True
        name = "SOMETHING-ELSE" if self.fault == "identity" else "PRECESS-BOARD"
        self._reply(seq, "OK", name, f"{major}.{bp.PROTOCOL_VERSION[1]}", self.firmware, self.board_id)

    def _cmd_wdog(self, seq: int, args: tuple[str, ...]) -> None:
        if len(args) != 1 or not args[0].isdigit() or not 100 <= int(args[0]) <= 10000:
            self._reply(seq, "ERR", "RANGE", "watchdog 100 to 10000 ms")
            return
        self.state.watchdog_ms = int(args[0])
        self._reply(seq, "OK", self.state.watchdog_ms)

    def _cmd_ping(self, seq: int, args: tuple[str, ...]) -> None:
        self._reply(seq, "OK", self.state.path, int(self.state.tripped))

    def _cmd_stat(self, seq: int, args: tuple[str, ...]) -> None:
        s = self.state
        uptime_ms = int((time.monotonic() - self._started_s) * 1000)
        self._reply(seq, "OK", f"path={s.path}", f"tripped={int(s.tripped)}", f"wdog_ms={s.watchdog_ms}",
                    f"seg={s.segment_state}", f"uptime_ms={uptime_ms}")

    def _cmd_clear(self, seq: int, args: tuple[str, ...]) -> None:
        self.state.tripped = False
        self._reply(seq, "OK")

    def _cmd_path(self, seq: int, args: tuple[str, ...]) -> None:
        if len(args) != 1 or args[0] not in bp.PATHS:
            self._reply(seq, "ERR", "SYNTAX", "PATH " + "|".join(bp.PATHS))
            return
        if args[0] != "idle" and self.state.tripped:
            self._reply(seq, "ERR", "TRIPPED", "watchdog tripped; send CLEAR")
            return
        if self.state.segment_state in ("armed", "running"):
            self.state.segment_state = "aborted"
        self._set_path(args[0], "host")
        self._reply(seq, "OK", args[0])

    def _cmd_sens(self, seq: int, args: tuple[str, ...]) -> None:
        current = self.coil_current_a()
        self._reply(seq, "OK", f"temp_c={self.state.temperature_c:.2f}", f"current_a={current:.3f}",
                    f"battery_v={self.battery_v - 0.05 * current:.2f}")

    def _cmd_seg(self, seq: int, args: tuple[str, ...]) -> None:
        try:
            timing = bp.SegmentTiming.from_args(args)
        except ValueError as exc:
            self._reply(seq, "ERR", "RANGE", str(exc).replace("*", ""))
            return
        if self.state.tripped:
            self._reply(seq, "ERR", "TRIPPED", "watchdog tripped; send CLEAR")
            return
        if self.state.path != "polarise":
            self._reply(seq, "ERR", "STATE", "SEG needs path polarise")
            return
        s = self.state
        s.segment, s.segment_state, s.armed_at_s, s.off_at_s = timing, "armed", time.monotonic(), None
        s.extra_tx_us = []
        self._reply(seq, "OK", "armed")

    def _cmd_segtx(self, seq: int, args: tuple[str, ...]) -> None:
        s = self.state
        if len(args) != 2 or not all(a.isdigit() for a in args):
            self._reply(seq, "ERR", "SYNTAX", "SEGTX <start_us> <len_us>")
        elif s.segment_state != "armed":
            self._reply(seq, "ERR", "STATE", "SEGTX needs an armed segment")
        elif len(s.extra_tx_us) >= bp.MAX_EXTRA_TX_WINDOWS:
            self._reply(seq, "ERR", "RANGE", f"at most {bp.MAX_EXTRA_TX_WINDOWS + 1} transmit windows")
        else:
            s.extra_tx_us.append((int(args[0]), int(args[1])))
            self._reply(seq, "OK", len(s.extra_tx_us) + 1)

    def _cmd_segq(self, seq: int, args: tuple[str, ...]) -> None:
        s = self.state
        off_us = int((s.off_at_s - s.armed_at_s) * 1e6) if s.off_at_s is not None else -1
        self._reply(seq, "OK", f"state={s.segment_state}", f"off_us={off_us}")
