"""An emulated analog front end on the JACK server: what sits between a sound card and the coil.

It is a JACK client with two inputs (the card's pulse and marker outputs) and two outputs
(to the card's signal and reference inputs).  A wiring thread connects every new PortAudio
stream to it, as the cables of a real rig would be.  In "loopback" mode the marker comes
straight back on the reference input (the calibration cable); in "nmr" mode the marker
burst detector fires the board emulator's trigger input and the signal input receives a
free induction decay A exp(-t/T2*) cos(2 pi f t) starting at the marker - the switch-off.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

import numpy as np

MARKER_THRESHOLD = 0.25


@dataclass
class FidTruth:
    amplitude_v: float = 0.05
    frequency_hz: float = 2087.5
    t2star_s: float = 0.4


class AnalogFrontEnd:
    def __init__(self, jack_module, server_name: str, rate_hz: float, board=None, truth: FidTruth = FidTruth(),
                 pulse_out: int = 0, marker_out: int = 1, signal_in: int = 0, reference_in: int = 1) -> None:
        self.jack = jack_module
        self.rate_hz = rate_hz
        self.board = board
        self.truth = truth
        self.mode = "nmr"
        self.map = {"pulse": pulse_out, "marker": marker_out, "signal": signal_in, "reference": reference_in}
        self.markers_seen = 0
        self._fid_sample: int | None = None  # samples since the FID began, or None
        self._quiet = 0  # samples since the marker was last above threshold
        self.client = jack_module.Client("heron-frontend", no_start_server=True, servername=server_name)
        self.marker_in = self.client.inports.register("marker")
        self.pulse_in = self.client.inports.register("pulse")
        self.signal_out = self.client.outports.register("signal")
        self.reference_out = self.client.outports.register("reference")
        self.client.set_process_callback(self._process)
        self._stop = threading.Event()
        self._wiring = threading.Thread(target=self._wire_forever, daemon=True)

    def start(self) -> "AnalogFrontEnd":
        self.client.activate()
        self._wiring.start()
        return self

    def close(self) -> None:
        self._stop.set()
        self._wiring.join(timeout=5)
        self.client.deactivate()
        self.client.close()

    # ---- the audio path (JACK process thread) ---------------------------------------------------
    def _process(self, frames: int) -> None:
        marker = self.marker_in.get_array()
        signal = self.signal_out.get_array()
        reference = self.reference_out.get_array()
        signal.fill(0.0)
        reference.fill(0.0)
        if self.mode == "loopback":
            reference[:] = marker
            return
        above = np.flatnonzero(np.abs(marker) > MARKER_THRESHOLD)
        if above.size and self._quiet > self.rate_hz * 0.01:
            self.markers_seen += 1
            if self.board is not None:
                self.board.marker()
            self._fid_sample = -int(above[0])
        self._quiet = frames - 1 - int(above[-1]) if above.size else self._quiet + frames
        if self._fid_sample is not None:
            t = (self._fid_sample + np.arange(frames)) / self.rate_hz
            tr = self.truth
            fid = tr.amplitude_v * np.exp(-t / tr.t2star_s) * np.cos(2 * np.pi * tr.frequency_hz * t)
            signal[:] = np.where(t >= 0, fid, 0.0)
            self._fid_sample += frames

    # ---- the cables (a normal thread) -------------------------------------------------------------
    def _wire_forever(self) -> None:
        while not self._stop.wait(0.02):
            try:
                self._wire()
            except Exception:  # noqa: BLE001 - a stream closed between listing and connecting: try again
                pass

    def _wire(self) -> None:
        """Cable the open stream's channels; PortAudio numbers JACK ports on from earlier streams
        of the same process (out_2, out_3 for a second stream), so channels go by position."""
        c = self.client
        name = c.name
        outs = _by_number(c.get_ports("PortAudio", is_audio=True, is_output=True))
        ins = _by_number(c.get_ports("PortAudio", is_audio=True, is_input=True))
        if len(outs) <= max(self.map["pulse"], self.map["marker"]) or \
                len(ins) <= max(self.map["signal"], self.map["reference"]):
            return
        wanted = {(outs[self.map["pulse"]], f"{name}:pulse"), (outs[self.map["marker"]], f"{name}:marker"),
                  (f"{name}:signal", ins[self.map["signal"]]), (f"{name}:reference", ins[self.map["reference"]])}
        for port_name in outs + ins:
            port = c.get_port_by_name(port_name)
            for other in c.get_all_connections(port):
                pair = (port_name, other.name) if port.is_output else (other.name, port_name)
                if pair not in wanted:
                    c.disconnect(*pair)
        for source, destination in wanted:
            if destination not in {p.name for p in c.get_all_connections(source)}:
                c.connect(source, destination)


def _by_number(ports) -> list[str]:
    """Port names sorted by their trailing number (PortAudio:out_10 after out_9)."""
    return sorted((p.name for p in ports), key=lambda n: int(n.rsplit("_", 1)[-1]))
