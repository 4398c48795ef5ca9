"""Refresh rate and CPU use of `precess tui` while a simulated run streams shots (targets: >= 10
frames per second, < 25 % of one core for the UI thread).

The TUI runs as a real program in an 80x24 pseudo-terminal, as over SSH.  This benchmark is
the terminal: it answers the synchronized-output query, so every frame arrives between
ESC[?2026h and ESC[?2026l and can be counted, and it types the keys (p + g w: plan, queue,
go, watch).  CPU comes from /proc per thread: the main thread runs the UI (asyncio loop:
records in, layout, rendering); the other threads are the engine with the simulator, the live
analysis and the terminal reader/writer.  Baseline in the same run: the same program idle
for the same time before the run starts.
"""

from __future__ import annotations

import fcntl
import os
import pty
import select
import shutil
import struct
import sys
import tempfile
import termios
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
RIG = ROOT / "configs" / "rigs" / "demo-sim.toml"
SEQUENCE = ROOT / "configs" / "sequences" / "fid-sudden.toml"
SYNC_START, SYNC_QUERY, SYNC_REPLY = b"\x1b[?2026h", b"\x1b[?2026$p", b"\x1b[?2026;2$y"
TARGET_FPS, TARGET_CORE_FRACTION = 10.0, 0.25
TICKS_PER_S = os.sysconf("SC_CLK_TCK")
DOWN = b"\x1b[B"


class Terminal:
    """The master side of a pty running the TUI."""

    def __init__(self, pace: float, folder: Path) -> None:
        sequences = folder / "sequences"
        sequences.mkdir()
        shutil.copy(SEQUENCE, sequences)  # the plan screen then lists just this one
        self.pid, self.fd = pty.fork()
        if self.pid == 0:  # child: the TUI on the demo rig
            os.environ.update(TERM="xterm-256color", COLUMNS="80", LINES="24")
            os.execv(sys.executable, [sys.executable, "-m", "controller.cli.main", "tui", "--rig", str(RIG),
                                      "--db", str(folder / "bench.sqlite"), "--state-dir", str(folder / "state"),
                                      "--sequences", str(sequences), "--pace", str(pace)])
        fcntl.ioctl(self.fd, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 80, 0, 0))
        self.frames = 0
        self.bytes = 0
        self._tail = b""

    def pump(self, duration_s: float) -> None:
        """Read (and answer) the terminal output for duration_s."""
        end = time.monotonic() + duration_s
        while (left := end - time.monotonic()) > 0:
            ready, _, _ = select.select([self.fd], [], [], left)
            if not ready:
                continue
            try:
                data = os.read(self.fd, 65536)
            except OSError:
                return
            if not data:
                return
            self.bytes += len(data)
            seen = self._tail + data
            self.frames += seen.count(SYNC_START) - self._tail.count(SYNC_START)
            if SYNC_QUERY in seen and SYNC_QUERY not in self._tail:
                os.write(self.fd, SYNC_REPLY)
            self._tail = seen[-16:]

    def keys(self, *keys: bytes) -> None:
        for key in keys:
            os.write(self.fd, key)
            self.pump(0.3)

    def cpu_s(self) -> tuple[float, float]:
        """(main thread, other threads) CPU seconds of the TUI process so far."""
        main = others = 0.0
        for tid in os.listdir(f"/proc/{self.pid}/task"):
            fields = Path(f"/proc/{self.pid}/task/{tid}/stat").read_text().rsplit(")", 1)[1].split()
            used = (int(fields[11]) + int(fields[12])) / TICKS_PER_S  # utime + stime
            if int(tid) == self.pid:
                main += used
            else:
                others += used
        return main, others

    def measure(self, duration_s: float) -> tuple[float, float, float, float]:
        """(frames per s, bytes per s, main-thread core fraction, other-threads core fraction)."""
        frames, nbytes, (main0, other0), t0 = self.frames, self.bytes, self.cpu_s(), time.monotonic()
        self.pump(duration_s)
        (main1, other1), wall = self.cpu_s(), time.monotonic() - t0
        return ((self.frames - frames) / wall, (self.bytes - nbytes) / wall, (main1 - main0) / wall,
                (other1 - other0) / wall)

    def close(self) -> int:
        os.write(self.fd, b"\x18")  # ctrl+x: emergency stop
        self.pump(2.0)
        os.write(self.fd, b"q")
        self.pump(0.5)
        os.write(self.fd, b"y")  # if the run had not ended yet, confirm: stop and quit
        self.pump(0.5)
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:
            pid, status = os.waitpid(self.pid, os.WNOHANG)
            if pid:
                return os.waitstatus_to_exitcode(status)
            self.pump(0.2)
        os.kill(self.pid, 9)
        os.waitpid(self.pid, 0)
        return -9


def run(pace: float, seconds: float) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        term = Terminal(pace, Path(tmp))
        term.pump(5.0)  # start-up
        idle = term.measure(seconds)
        # plan: fid-sudden, shots = 40, queue it, go, watch
        term.keys(b"p", b"\t", DOWN, DOWN, b"\r", b"\x15", b"40", b"\r", b"+", b"g", b"w")
        term.pump(2.0)  # first shot under way
        streaming = term.measure(seconds)
        code = term.close()
    for label, (fps, bps, main, others) in (("idle (baseline)", idle), ("run streaming", streaming)):
        print(f"  {label:16} {fps:6.1f} fps {bps / 1e3:8.1f} kB/s   UI thread {100 * main:5.1f} % of a core"
              f"   other threads {100 * others:5.1f} %")
    fps, _, main, _ = streaming
    verdict = "ok" if fps >= TARGET_FPS and main < TARGET_CORE_FRACTION else "MISSED"
    ratio = f"{main / idle[2]:.1f}x idle" if idle[2] > 0 else "idle ~0"
    print(f"  pace {pace:g}: {fps:.1f} fps (target >= {TARGET_FPS:g}), UI thread {100 * main:.1f} % "
          f"(target < {100 * TARGET_CORE_FRACTION:.0f} %, {ratio}) -> {verdict}; exit code {code}")


def main() -> None:
    for pace, seconds in ((1.0, 10.0), (0.25, 8.0)):
        print(f"precess tui, demo rig, fid-sudden x40, simulated time x{1 / pace:g} of real time:")
        run(pace, seconds)


if __name__ == "__main__":
    main()
