"""Real transports for driver tests: a JACK server (dummy backend), a pty board, SCPI emulators on TCP.

Import the fixtures you need into a test module (`from transports import jack_server`).
The JACK server is skipped only where it cannot start and CI is not set; under CI=true a
server that cannot start is a failure, so the audio tests can never be skipped silently.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator

import pytest

from drivers.emulators.board import BoardEmulator

JACK_RATE_HZ = 48000
JACK_PERIOD = 2048
ROOT = Path(__file__).resolve().parent.parent


def _unavailable(reason: str) -> None:
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail(f"CI must run the audio tests, but {reason}")
    pytest.skip(reason)


@dataclass
class JackServer:
    """A running jackd and a JACK client for wiring ports."""

    name: str
    process: subprocess.Popen
    client: Any
    extra_clients: list[Any] = field(default_factory=list)

    def portaudio_ports(self, output: bool) -> list[Any]:
        """The open stream's ports in channel order (PortAudio numbers them on across streams)."""
        ports = self.client.get_ports("PortAudio", is_audio=True, is_output=output, is_input=not output)
        return sorted(ports, key=lambda p: int(p.name.rsplit("_", 1)[-1]))

    def unwire_portaudio(self) -> None:
        for port in self.client.get_ports("PortAudio", is_audio=True):
            for other in self.client.get_all_connections(port):
                if port.is_output:
                    self.client.disconnect(port, other)
                else:
                    self.client.disconnect(other, port)

    def connect(self, source: Any, destination: Any) -> None:
        self.client.connect(source, destination)


@pytest.fixture(scope="session")
def jack_server() -> Iterator[JackServer]:
    """jackd with the dummy backend under a unique name; PortAudio re-initialised to see it."""
    if shutil.which("jackd") is None:
        _unavailable("jackd is not installed (Debian package jackd2)")
    try:
        import jack
    except (ImportError, OSError) as exc:
        _unavailable(f"JACK-Client cannot load libjack ({exc})")
    jack.set_error_function(lambda message: None)  # "cannot connect" while polling is expected
    jack.set_info_function(lambda message: None)
    name = f"precess-test-{os.getpid()}"
    os.environ["JACK_DEFAULT_SERVER"] = name
    os.environ["JACK_NO_AUDIO_RESERVATION"] = "1"
    process = subprocess.Popen(["jackd", "--no-realtime", "-n", name, "-S", "-d", "dummy", "-r", str(JACK_RATE_HZ),
                                "-p", str(JACK_PERIOD)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    client = None
    deadline = time.monotonic() + 10.0
    while client is None:
        try:
            client = jack.Client("precess-wiring", no_start_server=True, servername=name)
        except jack.JackOpenError:
            if process.poll() is not None or time.monotonic() > deadline:
                process.kill()
                _unavailable(f"the JACK server {name!r} did not start")
            time.sleep(0.05)
    client.activate()
    try:
        import sounddevice as sd
    except OSError as exc:
        client.close()
        process.kill()
        _unavailable(f"PortAudio is missing ({exc}); Debian package libportaudio2")
    sd._terminate()  # PortAudio only sees JACK servers that were up when it initialised
    sd._initialize()
    server = JackServer(name=name, process=process, client=client)
    yield server
    for extra in server.extra_clients:
        extra.deactivate()
        extra.close()
    client.deactivate()
    client.close()
    sd._terminate()  # streams and PortAudio must go before jackd, or Python aborts at exit
    process.terminate()
    process.wait(timeout=10)
    sd._initialize()


@pytest.fixture
def board_emulator(tmp_path: Path) -> Iterator[BoardEmulator]:
    """The board emulator on a pty behind tmp_path/board (a stable link, like /dev/serial/by-id)."""
    emulator = BoardEmulator(tmp_path / "board").start()
    yield emulator
    emulator.stop()


@dataclass
class EmulatorProcess:
    process: subprocess.Popen
    ports: tuple[int, ...]

    def resource(self, index: int = 0) -> str:
        return f"TCPIP0::127.0.0.1::{self.ports[index]}::SOCKET"

    def kill(self) -> None:
        if self.process.poll() is None:
            self.process.kill()
            self.process.wait(timeout=10)


def start_emulator_process(module: str, *args: str) -> EmulatorProcess:
    """Run `python -m module --port 0 ...` and read the port(s) it prints."""
    cmd = [sys.executable, "-m", module, *args]
    process = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    line = process.stdout.readline() if process.stdout else ""
    if not line.startswith(("PORT ", "PORTS ")):
        process.kill()
        raise RuntimeError(f"{module} did not start: {line!r} {process.stderr.read() if process.stderr else ''}")
    return EmulatorProcess(process, tuple(int(p) for p in line.split()[1:]))


@pytest.fixture
def supply_process() -> Iterator[EmulatorProcess]:
    """The coil-supply emulator as its own process (so a test can make it vanish)."""
    emulator = start_emulator_process("drivers.emulators.scpi_supply", "--port", "0", "--resistance-ohm", "4.36",
                                      "--inductance-h", "0.0116")  # the Heron-2 coil
    yield emulator
    emulator.kill()
