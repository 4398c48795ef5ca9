"""An emulated function generator and digitiser wired in loopback, each on its own TCP port.

Wiring modelled: generator channel 1 (the burst) -> digitiser input 1; generator channel 2
(the switch-off marker, a 1 ms, 0.5 V pulse) -> digitiser input 2; generator sync ->
digitiser external trigger.  The burst is A cos(2 pi f t + p) for `cycles` periods from
the trigger delay, p the programmed start phase.  The capture completes n / fs seconds of
real time after *TRG.

    python -m drivers.emulators.scpi_daq      # prints "PORTS <generator> <digitiser>"
"""

from __future__ import annotations

import math
import struct
import sys
import time
from typing import Any

import numpy as np

from drivers.emulators.scpi_server import Instrument, ScpiServer

MARKER_PULSE_S = 0.001


class Generator(Instrument):
    identity = "Kestrel Instruments,KFG-2 (emulated),EMU0002,2.0"

    def __init__(self) -> None:
        super().__init__()
        self.digitiser: Digitiser | None = None
        self.reset()

    def reset(self) -> None:
        self.settings: dict[str, float] = {"FREQ": 1000.0, "VOLT": 0.1, "PHAS": 0.0, "NCYC": 1, "DEL": 0.0,
                                           "MDEL": 0.0}
        self.burst = False
        self.output = False

    def handle(self, header: str, argument: str) -> Any:
        keys = {"SOUR1:FREQ": "FREQ", "SOUR1:VOLT": "VOLT", "SOUR1:PHAS": "PHAS", "SOUR1:BURS:NCYC": "NCYC",
                "TRIG1:DEL": "DEL", "SOUR2:PULS:DEL": "MDEL"}
        if header in keys:
            try:
                self.settings[keys[header]] = float(argument)
            except ValueError:
                self.push_error(-104, "Data type error")
        elif header == "SOUR1:FUNC":
            if argument.upper() not in ("SIN", "SINUSOID"):
                self.push_error(-224, "Illegal parameter value")
        elif header == "SOUR1:BURS:STAT":
            self.burst = argument.upper() in ("ON", "1")
        elif header == "TRIG1:SOUR":
            pass
        elif header in ("OUTP1", "OUTP2"):
            self.output = argument.upper() in ("ON", "1")
        elif header == "*TRG":
            if self.digitiser is not None and self.output:
                self.digitiser.triggered(self.waveforms)
        else:
            self.push_error(-113, "Undefined header")
        return None

    def waveforms(self, n: int, fs: float) -> list[np.ndarray]:
        """What the generator's two outputs put on the digitiser's inputs, n samples from the trigger."""
        s = self.settings
        t = np.arange(n) / fs - s["DEL"]
        duration = s["NCYC"] / s["FREQ"]
        on = (t >= 0) & (t < duration) if self.burst else np.zeros(n, dtype=bool)
        burst = np.where(on, s["VOLT"] / 2 * np.cos(2 * math.pi * s["FREQ"] * t + math.radians(s["PHAS"])), 0.0)
        tm = np.arange(n) / fs - s["MDEL"]
        marker = np.where((tm >= 0) & (tm < MARKER_PULSE_S), 0.5, 0.0)
        return [burst, marker]


class Digitiser(Instrument):
    identity = "Kestrel Instruments,KDG-4 (emulated),EMU0003,1.1"

    def __init__(self) -> None:
        super().__init__()
        self.reset()

    def reset(self) -> None:
        self.srate = 48000.0
        self.points = 1000
        self.channels = 2
        self.range_v = 1.0
        self.armed = False
        self.done_at: float | None = None
        self.data: list[np.ndarray] = []

    def triggered(self, source: Any) -> None:
        if not self.armed:
            return
        waves = source(self.points, self.srate)
        self.data = [np.clip(waves[i] if i < len(waves) else np.zeros(self.points), -self.range_v, self.range_v)
                     for i in range(self.channels)]
        self.done_at = time.monotonic() + self.points / self.srate
        self.armed = False

    def handle(self, header: str, argument: str) -> Any:
        setters = {"ACQ:SRAT": ("srate", float), "ACQ:POIN": ("points", int), "ACQ:CHAN": ("channels", int),
                   "VOLT:RANG": ("range_v", float)}
        if header in setters:
            name, kind = setters[header]
            try:
                setattr(self, name, kind(float(argument)))
            except ValueError:
                self.push_error(-104, "Data type error")
        elif header == "TRIG:SOUR":
            pass
        elif header == "INIT":
            self.armed, self.done_at, self.data = True, None, []
        elif header == "ABOR":
            self.armed = False
        elif header == "ACQ:DONE?":
            return "1" if self.done_at is not None and time.monotonic() >= self.done_at else "0"
        elif header == "FETC:WAV?":
            index = int(argument or "1") - 1
            if not self.data or not 0 <= index < len(self.data):
                self.push_error(-230, "Data corrupt or stale")
                return "#10"
            payload = struct.pack(f"<{self.points}f", *self.data[index])
            digits = str(len(payload))
            return b"#" + str(len(digits)).encode() + digits.encode() + payload + b"\n"
        else:
            self.push_error(-113, "Undefined header")
        return None


def start_pair(generator_port: int = 0, digitiser_port: int = 0) -> tuple[ScpiServer, ScpiServer]:
    """Both instruments, wired, each serving on 127.0.0.1 in a thread."""
    gen, dig = Generator(), Digitiser()
    gen.digitiser = dig
    return ScpiServer(gen, generator_port).start(), ScpiServer(dig, digitiser_port).start()


def main() -> int:
    gen, dig = start_pair()
    print(f"PORTS {gen.port} {dig.port}", flush=True)
    try:
        while True:
            time.sleep(1.0)
    except KeyboardInterrupt:
        pass
    gen.stop()
    dig.stop()
    return 0


if __name__ == "__main__":
    sys.exit(main())
