"""A small SCPI-over-TCP server (raw socket, newline-terminated), the base of the instrument emulators.

An instrument model implements `handle(header, argument) -> reply or None`; the server
splits compound messages at ';' (a leading ':' or a new header resets to the root),
normalises long forms to short forms, answers IEEE 488.2 *IDN?, *CLS, *RST, *OPC? and
SYST:ERR?, and keeps the error queue.  `EMUL:FAULT <mode>` (an emulator-only command)
makes the instrument misbehave for tests: garbage, silent, identity, overrange, none.
Run one as a process with `python -m drivers.emulators.<name> --port 0`: it prints
"PORT <n>" once it listens.
"""

from __future__ import annotations

import argparse
import socket
import socketserver
import sys
import threading
from typing import Any

LONG_FORMS = {"SOURCE": "SOUR", "CURRENT": "CURR", "VOLTAGE": "VOLT", "OUTPUT": "OUTP", "MEASURE": "MEAS",
              "SYSTEM": "SYST", "ERROR": "ERR", "TRIGGER": "TRIG", "FUNCTION": "FUNC", "FREQUENCY": "FREQ",
              "PHASE": "PHAS", "BURST": "BURS", "STATE": "STAT", "ACQUIRE": "ACQ", "POINTS": "POIN",
              "FETCH": "FETC", "WAVEFORM": "WAV", "RANGE": "RANG", "SOURCE1": "SOUR1", "SOURCE2": "SOUR2",
              "OUTPUT1": "OUTP1", "OUTPUT2": "OUTP2", "TRIGGER1": "TRIG1", "DELAY": "DEL", "PULSE": "PULS",
              "INITIATE": "INIT", "ABORT": "ABOR", "CHANNELS": "CHAN", "SRATE": "SRAT"}
FAULTS = ("none", "garbage", "silent", "identity", "overrange")


def normalise(header: str) -> str:
    """Upper-case, long forms to short forms, optional root 'SOUR:' kept as written."""
    parts = header.upper().strip(":").split(":")
    return ":".join(LONG_FORMS.get(p, p) for p in parts)


class Instrument:
    """Base model: identity, error queue, faults.  Subclasses add `handle`."""

    identity = "Kestrel Instruments,EMULATOR,0,1.0"

    def __init__(self) -> None:
        self.lock = threading.RLock()
        self.errors: list[str] = []
        self.fault = "none"
        self.log: list[str] = []

    def push_error(self, code: int, text: str) -> None:
        self.errors.append(f'{code},"{text}"')

    def common(self, header: str, argument: str) -> tuple[bool, str | None]:
        """IEEE 488.2 and SCPI commands every instrument has; (handled, reply)."""
        if header == "*IDN?":
            ident = "Otherco,Wrong Model,9,9.9" if self.fault == "identity" else self.identity
            return True, ident
        if header in ("*CLS",):
            self.errors.clear()
            return True, None
        if header == "*RST":
            self.reset()
            return True, None
        if header == "*OPC?":
            return True, "1"
        if header == "SYST:ERR?":
            return True, self.errors.pop(0) if self.errors else '0,"No error"'
        if header == "EMUL:FAULT":
            if argument.lower() not in FAULTS:
                self.push_error(-224, "Illegal parameter value")
            else:
                self.fault = argument.lower()
            return True, None
        return False, None

    def reset(self) -> None:
        """*RST: subclasses put their state to power-on values."""

    def handle(self, header: str, argument: str) -> Any:
        raise NotImplementedError

    def execute(self, message: str) -> list[Any]:
        """Run one message (possibly compound); the replies of its queries, in order."""
        replies = []
        with self.lock:
            for unit in message.split(";"):
                unit = unit.strip()
                if not unit:
                    continue
                header, _, argument = unit.partition(" ")
                header = normalise(header) if not header.startswith("*") else header.upper()
                argument = argument.strip()
                self.log.append(f"{header} {argument}".strip())
                handled, reply = self.common(header, argument)
                if not handled:
                    reply = self.handle(header, argument)
                if reply is not None:
                    replies.append(reply)
        return replies


class _Handler(socketserver.StreamRequestHandler):
    def handle(self) -> None:
        inst: Instrument = self.server.instrument  # type: ignore[attr-defined]
        self.server.connections.add(self.connection)  # type: ignore[attr-defined]
        try:
            for raw in self.rfile:
                message = raw.decode("ascii", errors="replace").strip()
                if not message:
                    continue
                for reply in inst.execute(message):
                    if inst.fault == "silent":
                        continue
                    if inst.fault == "garbage" and "EMUL" not in message:
                        self.wfile.write(b"\x15#?garbled\x07 reply\n")
                        continue
                    data = reply if isinstance(reply, bytes) else (str(reply) + "\n").encode("ascii")
                    self.wfile.write(data)
        except OSError:
            pass
        finally:
            self.server.connections.discard(self.connection)  # type: ignore[attr-defined]


class ScpiServer(socketserver.ThreadingTCPServer):
    """Serves one Instrument on 127.0.0.1; `port` is the bound port (0 asks the OS for one)."""

    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, instrument: Instrument, port: int = 0, host: str = "127.0.0.1") -> None:
        super().__init__((host, port), _Handler)
        self.instrument = instrument
        self.connections: set[socket.socket] = set()
        self._thread: threading.Thread | None = None

    @property
    def port(self) -> int:
        return int(self.server_address[1])

    def start(self) -> "ScpiServer":
        self._thread = threading.Thread(target=self.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True)
        self._thread.start()
        return self

    def stop(self) -> None:
        """The instrument disappears: stop listening and drop every connection."""
        self.shutdown()
        for conn in list(self.connections):
            try:
                conn.shutdown(socket.SHUT_RDWR)
                conn.close()
            except OSError:
                pass
        self.server_close()


def serve_main(make_instrument: Any, add_arguments: Any, description: str, argv: list[str] | None = None) -> int:
    """Command-line entry of an emulator module: build the instrument, print PORT n, serve until killed."""
    parser = argparse.ArgumentParser(description=description)
    parser.add_argument("--port", type=int, default=0, help="TCP port on 127.0.0.1 (0 = any free port)")
    add_arguments(parser)
    args = parser.parse_args(argv)
    server = ScpiServer(make_instrument(args), args.port)
    print(f"PORT {server.port}", flush=True)
    try:
        server.serve_forever(poll_interval=0.05)
    except KeyboardInterrupt:
        pass
    finally:
        server.server_close()
    sys.stdout.flush()
    return 0
