"""`precess tui` as a real program in an 80x24 pseudo-terminal (as over SSH).

Common practice, no source: a dropped connection (SIGHUP) must end the program with the run
stopped and recorded, never by killing it with the coil on.
"""

from __future__ import annotations

import fcntl
import os
import pty
import select
import signal
import struct
import sys
import termios
import time

import pytest

from controller.store import Store

from tests.conftest import DEMO_RIG, ROOT

pytestmark = pytest.mark.timeout(90)
SYNC_QUERY, SYNC_REPLY = b"\x1b[?2026$p", b"\x1b[?2026;2$y"


class Pty:
    def __init__(self, *args: str) -> None:
        self.pid, self.fd = pty.fork()
        if self.pid == 0:
            os.chdir(ROOT)
            os.environ.update(TERM="xterm-256color", NO_COLOR="1")
            os.execv(sys.executable, [sys.executable, "-m", "controller.cli.main", *args])
        fcntl.ioctl(self.fd, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 80, 0, 0))
        self.output = b""

    def read_for(self, seconds: float) -> None:
        end = time.monotonic() + seconds
        while (left := end - time.monotonic()) > 0:
            if select.select([self.fd], [], [], left)[0]:
                try:
                    data = os.read(self.fd, 65536)
                except OSError:
                    return
                if not data:
                    return
                if SYNC_QUERY in data:
                    os.write(self.fd, SYNC_REPLY)
                self.output += data

    def wait_for(self, needle: bytes, seconds: float = 20.0) -> None:
        end = time.monotonic() + seconds
        while needle not in self.output:
            assert time.monotonic() < end, f"{needle!r} never appeared"
            self.read_for(0.1)

    def keys(self, *keys: bytes) -> None:
        for key in keys:
            os.write(self.fd, key)
            self.read_for(0.3)

    def exit_code(self, seconds: float = 30.0) -> int:
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            pid, status = os.waitpid(self.pid, os.WNOHANG)
            if pid:
                return os.waitstatus_to_exitcode(status)
            self.read_for(0.1)
        os.kill(self.pid, signal.SIGKILL)
        os.waitpid(self.pid, 0)
        raise AssertionError("the program did not end; last output: " + repr(self.output[-1500:]))


def test_hangup_mid_run_stops_the_run_and_records_it(tmp_path):
    db = tmp_path / "t.sqlite"
    term = Pty("tui", "--rig", str(DEMO_RIG), "--db", str(db), "--state-dir", str(tmp_path / "state"),
               "--pace", "0.5")
    term.wait_for(b"E-STOP")  # the key bar of the watch screen is drawn
    term.keys(b"p", b"+", b"g", b"w")  # first sequence, queued, go
    term.wait_for(b"RUN", 20)
    term.read_for(1.5)  # polarising
    os.kill(term.pid, signal.SIGHUP)
    assert term.exit_code() == 130  # as for Ctrl-C
    assert b"the terminal hung up; the run was stopped and the rig made safe" in term.output
    with Store(db) as store:
        (run,) = store.runs()
    assert run["exit_status"] == "stopped" and run["shots_stored"] < run["shots_planned"]
