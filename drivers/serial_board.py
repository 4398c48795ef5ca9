"""The switch/sensor board over a serial port (pyserial), speaking docs/board-protocol.md.

One request at a time under a lock; every reply must echo the request's sequence number
and carry a good checksum.  A heartbeat thread sends PING whenever the port has been quiet
for `heartbeat_s`, so the board's watchdog (which turns the coil off by itself) stays fed
even while the engine is blocked in a long acquisition.  When the port vanishes (USB
unplugged) the driver waits up to `reconnect_s` for it to return, repeats the handshake,
and carries on only if the board still holds the path the host expects.
"""

from __future__ import annotations

import threading
import time
from typing import Any

import numpy as np

from controller.config.hardware import SerialBoardConfig
from controller.errors import DriverError
from drivers import board_protocol as bp
from drivers.segment import samples_to_us, segment_edges

TIMER_HOLD_MARGIN_S = 2.0  # marker trigger: how long past the planned switch-off the board may wait
MAX_STRAY_LINES = 20
SENSOR_NAMES = {"temp_c": "coil_temperature_c", "current_a": "current_sense_a", "battery_v": "battery_v"}


class SerialBoard:
    """Driver of the serial switch/sensor board; see module docstring."""

    def __init__(self, cfg: SerialBoardConfig, serial_factory: Any = None) -> None:
        self.cfg = cfg
        self._serial_factory = serial_factory
        self._lock = threading.RLock()
        self._port: Any = None
        self._seq = 0
        self._last_io = 0.0
        self._expected_path = "idle"
        self._identity: tuple[str, ...] = ()
        self._notes: list[str] = []
        self._fault = ""  # set by the heartbeat thread; raised by the next foreground call
        self._tripped = False
        self._segment_armed = False
        self._closing = threading.Event()
        self._heartbeat: threading.Thread | None = None
        self.reconnects = 0

    # ---- connection ---------------------------------------------------------------------
    def open(self) -> "SerialBoard":
        with self._lock:
            self._connect()
            reply = self._request("STAT")
            state = bp.parse_pairs(reply.args)
            if state.get("tripped") == "1":
                self._notes.append("the board reported a watchdog trip from before this session; cleared at open")
                self._request("CLEAR")
            self._request("PATH", "idle")
        self._heartbeat = threading.Thread(target=self._heartbeat_loop, name="board-heartbeat", daemon=True)
        self._heartbeat.start()
        return self

    def _serial(self) -> Any:
        if self._serial_factory is not None:
            return self._serial_factory(self.cfg)
        import serial  # pyserial

        return serial.Serial(self.cfg.port, self.cfg.baud, timeout=self.cfg.reply_timeout_s,
                             write_timeout=self.cfg.reply_timeout_s)

    def _connect(self) -> None:
        """Open the port and shake hands: protocol version, then the watchdog time."""
        try:
            self._port = self._serial()
        except (OSError, ValueError) as exc:
            raise DriverError(f"serial board: cannot open {self.cfg.port} ({_why(exc)})") from None
        self._port.reset_input_buffer()
        hello = self._request("HELLO", "{}.{}".format(*bp.PROTOCOL_VERSION), retry=False)
        if len(hello.args) < 4 or hello.args[0] != "PRECESS-BOARD":
            raise DriverError(f"serial board on {self.cfg.port}: unexpected identity {' '.join(hello.args)!r}; "
                              "allowed: PRECESS-BOARD <version> <firmware> <id>")
        self._identity = hello.args
        self._request("WDOG", int(round(self.cfg.watchdog_s * 1000)), retry=False)

    def _drop_port(self) -> None:
        if self._port is not None:
            try:
                self._port.close()
            except Exception:  # noqa: BLE001 - the port is already gone
                pass
        self._port = None

    def _reconnect(self, cause: str) -> None:
        """Wait up to reconnect_s for the port to come back; the board must still hold our path."""
        self._drop_port()
        deadline = time.monotonic() + self.cfg.reconnect_s
        last = cause
        while True:
            try:
                self._connect()
                break
            except DriverError as exc:
                last = str(exc)
                self._drop_port()
            if time.monotonic() >= deadline or self._closing.is_set():
                raise DriverError(f"serial board on {self.cfg.port} vanished ({cause}) and did not come back "
                                  f"within {self.cfg.reconnect_s:g} s ({last})")
            time.sleep(0.05)
        self.reconnects += 1
        state = bp.parse_pairs(self._request("STAT", retry=False).args)
        if self._expected_path == "idle":
            return  # the caller is about to set idle anyway
        if state.get("tripped") == "1":
            self._tripped = True
            raise DriverError("serial board: its watchdog switched the coil off while the port was away")
        if state.get("path") != self._expected_path:
            raise DriverError(f"serial board came back in path {state.get('path')!r}, not {self._expected_path!r} "
                              "(it lost power or reset); the shot in progress is void")

    def close(self) -> None:
        """Coil idle (attempted), heartbeat stopped, port closed.  Idempotent."""
        self._closing.set()
        if self._heartbeat is not None:
            self._heartbeat.join(timeout=5)
        with self._lock:
            if self._port is not None:
                try:
                    self._request("PATH", "idle", retry=False)
                except DriverError:
                    pass
            self._drop_port()

    # ---- one request/reply --------------------------------------------------------------
    def _request(self, word: str, *args: object, retry: bool = True) -> bp.Frame:
        """Send one request and return its OK reply; ERR replies and silence become DriverError.

        A vanished port is waited for (reconnect_s) and the request sent once more; a missing
        reply is asked for once more.  SerialException is an OSError.
        """
        with self._lock:
            for attempt in (1, 2):
                last = attempt == 2 or not retry
                try:
                    if self._port is None:
                        self._reconnect("port closed")
                    reply = self._exchange(word, args)
                    break
                except _NoReply as exc:
                    if last:
                        raise DriverError(f"serial board on {self.cfg.port}: no reply to {word} within "
                                          f"{self.cfg.reply_timeout_s:g} s{exc}") from None
                except OSError as exc:
                    self._drop_port()
                    if last:
                        raise DriverError(f"serial board on {self.cfg.port}: {word} failed ({_why(exc)})") from None
        if reply.word == "ERR":
            code = reply.args[0] if reply.args else "?"
            if code == "TRIPPED":
                self._tripped = True
            raise DriverError(f"serial board refused {word} {' '.join(map(str, args))}: {' '.join(reply.args)}".rstrip())
        if not reply.ok:
            raise DriverError(f"serial board: reply {reply.word!r} to {word}; allowed: OK or ERR")
        return reply

    def _exchange(self, word: str, args: tuple[object, ...]) -> bp.Frame:
        self._seq = self._seq % 65535 + 1
        seq = self._seq
        self._port.write(bp.encode(">", seq, word, *args))
        self._last_io = time.monotonic()
        deadline = time.monotonic() + self.cfg.reply_timeout_s
        strays = 0
        garbage = ""
        while True:
            line = self._port.readline()
            if not line or not line.endswith(b"\n"):
                if time.monotonic() >= deadline:
                    raise _NoReply(f" (only garbage came back: {garbage}; check the port and the baud rate "
                                   f"{self.cfg.baud})" if garbage else "")
                continue
            try:
                frame = bp.decode(line)
            except bp.FrameError as exc:
                garbage = str(exc)
                strays += 1
                if strays > MAX_STRAY_LINES:
                    raise DriverError(f"serial board on {self.cfg.port}: only garbage in reply to {word} "
                                      f"({exc}); check the port and baud rate ({self.cfg.baud})") from None
                continue
            if frame.kind == "<" and frame.seq == seq:
                return frame
            if frame.kind == "<" and frame.seq == 0 and frame.word == "ERR":
                raise _NoReply  # the board could not read our frame (damaged on the wire): ask again
            strays += 1  # a late reply to an earlier request
            if strays > MAX_STRAY_LINES:
                raise DriverError(f"serial board on {self.cfg.port}: no reply matching request {seq} ({word})")

    # ---- heartbeat ----------------------------------------------------------------------
    def _heartbeat_loop(self) -> None:
        """PING whenever the port was quiet for heartbeat_s; reconnect if it vanished."""
        period = self.cfg.heartbeat_s
        while not self._closing.wait(period / 4):
            if time.monotonic() - self._last_io < period or self._fault:
                continue
            if not self._lock.acquire(timeout=period):
                continue
            try:
                reply = self._request("PING")
                if len(reply.args) >= 2 and reply.args[1] == "1":
                    self._tripped = True
            except DriverError as exc:
                self._fault = str(exc)
            finally:
                self._lock.release()

    def _check_tripped(self) -> None:
        if self._fault:
            raise DriverError(self._fault)
        if self._tripped:
            raise DriverError("serial board: its watchdog has switched the coil off (the host was silent for more "
                              f"than {self.cfg.watchdog_s:g} s); the run cannot continue")

    # ---- the SwitchBoard protocol -------------------------------------------------------
    def set_path(self, path: str) -> None:
        if path not in bp.PATHS:
            raise DriverError(f"serial board: unknown coil path {path!r}; allowed: {', '.join(bp.PATHS)}")
        if path != "idle":
            self._check_tripped()
        with self._lock:
            if path == "idle":
                self._expected_path = "idle"  # a reconnect on the way must not insist on the old path
            self._request("PATH", path)
            self._expected_path = path
            self._segment_armed = False if path == "idle" else self._segment_armed
        if path != "idle":
            self._check_tripped()

    def read_sensors(self) -> dict[str, float]:
        reply = self._request("SENS")
        self._check_tripped()
        values = {}
        for key, text in bp.parse_pairs(reply.args).items():
            try:
                values[SENSOR_NAMES.get(key, key)] = float(text)
            except ValueError:
                raise DriverError(f"serial board: sensor {key} reads {text!r}, not a number") from None
        return values

    def describe(self) -> dict[str, Any]:
        ident = self._identity
        return {"driver": "serial", "role": "board", "port": self.cfg.port, "watchdog_s": self.cfg.watchdog_s,
                "protocol": ident[1] if len(ident) > 1 else "", "firmware": ident[2] if len(ident) > 2 else "",
                "board_id": ident[3] if len(ident) > 3 else "", "trigger": self.cfg.trigger,
                "notes": list(self._notes)}

    # ---- the timed segment --------------------------------------------------------------
    def arm_segment(self, gate: np.ndarray, tx: np.ndarray, sample_rate_hz: float) -> None:
        """Hand the board the segment's switch-off, transmit window and receive time."""
        self._check_tripped()
        edges = segment_edges(gate, tx)
        fs = sample_rate_hz
        if len(edges.tx_windows) > bp.MAX_EXTRA_TX_WINDOWS + 1:
            raise DriverError(f"serial board: the board runs at most {bp.MAX_EXTRA_TX_WINDOWS + 1} transmit windows "
                              f"per segment; this segment has {len(edges.tx_windows)}")
        windows = [(samples_to_us(max(0, a - edges.switch_off_sample), fs), samples_to_us(b - a, fs))
                   for a, b in edges.tx_windows] or [(0, 0)]
        hold_s = edges.switch_off_sample / fs + (TIMER_HOLD_MARGIN_S if self.cfg.trigger == "marker" else 0.0)
        timing = bp.SegmentTiming(
            trigger=self.cfg.trigger, hold_us=int(round(hold_s * 1e6)),
            ramp_us=samples_to_us(edges.ramp_end_sample - edges.switch_off_sample, fs), shape=edges.shape,
            tx_start_us=windows[0][0], tx_len_us=windows[0][1],
            receive_us=samples_to_us(edges.n_samples - edges.switch_off_sample, fs))
        self._request("SEG", *timing.args())
        for start_us, length_us in windows[1:]:
            self._request("SEGTX", start_us, length_us)
        self._segment_armed = True

    def finish_segment(self) -> tuple[bool, tuple[str, ...]]:
        """Ask the board how the segment went: (bad, notes).  Waits briefly for a segment still running."""
        if not self._segment_armed:
            return False, ()
        self._segment_armed = False
        deadline = time.monotonic() + 1.0
        while True:
            state = bp.parse_pairs(self._request("SEGQ").args)
            if state.get("state") != "running" or time.monotonic() > deadline:
                break
            time.sleep(0.01)
        notes = []
        if self.cfg.trigger == "timer":
            notes.append("board timer trigger: switch-off is not locked to the sample clock")
        result = state.get("state")
        if result == "done":
            return False, tuple(notes)
        if result == "timeout":
            return True, (*notes, "board: the switch-off marker never arrived; the board switched off on its own")
        return True, (*notes, f"board: segment ended in state {result!r}")


class _NoReply(Exception):
    """No reply line arrived within reply_timeout_s."""


def _why(exc: BaseException) -> str:
    text = str(exc).strip()
    return text or type(exc).__name__
