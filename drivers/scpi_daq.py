"""A function generator and a digitiser over VISA as transceiver (command maps in the rig file).

The generator plays the segment's transmit pulse as a triggered sine burst and a switch-off
marker on its second channel; the digitiser, triggered by the generator's sync output
(wired), captures the coil and reference channels for the whole segment at the rig's
sample rate and sends them as IEEE 488.2 binary blocks.  The burst's frequency, amplitude
and phase are read back out of the rendered transmit waveform (`burst_parameters`), so the
engine drives this transceiver exactly like a sound card.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from controller.config.hardware import ScpiDaqConfig
from controller.errors import DriverError
from drivers.protocols import Recording
from drivers.segment import segment_edges
from drivers.visa_session import VisaSession

READY_POLL_S = 0.01


@dataclass(frozen=True)
class Burst:
    start_sample: int
    n_samples: int
    frequency_hz: float
    amplitude_v: float
    phase_at_start_rad: float  # phase of A cos(.) at the burst's first sample


def burst_parameters(window: np.ndarray, sample_rate_hz: float, start_sample: int) -> Burst:
    """Frequency, amplitude and start phase of x[k] = A cos(w k + p), k = 0..N-1.

    cos w = sum x[k] (x[k-1] + x[k+1]) / (2 sum x[k]^2) over the inner samples (Prony's
    identity x[k-1] + x[k+1] = 2 cos(w) x[k] for one sinusoid); then A and p by linear least
    squares on cos(w k) and sin(w k).
    """
    x = np.asarray(window, dtype=float)
    if x.size < 4:
        raise DriverError(f"transmit pulse of {x.size} samples is too short for a generator burst")
    inner = x[1:-1]
    denominator = 2.0 * float(np.dot(inner, inner))
    cos_w = float(np.dot(inner, x[:-2] + x[2:])) / denominator if denominator > 0 else 1.0
    w = math.acos(min(1.0, max(-1.0, cos_w)))
    k = np.arange(x.size)
    basis = np.stack([np.cos(w * k), -np.sin(w * k)], axis=1)
    (c, s), *_ = np.linalg.lstsq(basis, x, rcond=None)
    return Burst(start_sample=start_sample, n_samples=int(x.size), frequency_hz=w * sample_rate_hz / (2 * math.pi),
                 amplitude_v=float(math.hypot(c, s)), phase_at_start_rad=float(math.atan2(s, c)))


class ScpiDaqTransceiver:
    """See module docstring."""

    def __init__(self, cfg: ScpiDaqConfig, sample_rate_hz: float, now: Callable[[], float] = time.time) -> None:
        self.cfg = cfg
        self.sample_rate_hz = float(sample_rate_hz)
        self._now = now
        self.gen_cmd = cfg.generator_commands
        self.dig_cmd = cfg.digitiser_commands
        refs = [f"reference{i}" if i > 1 else "reference" for i in range(1, cfg.input_channels)]
        self.channel_names = ("signal", *refs)
        self._gen: VisaSession | None = None
        self._dig: VisaSession | None = None
        self.identities: tuple[str, str] = ("", "")

    def open(self) -> "ScpiDaqTransceiver":
        c = self.cfg
        try:
            self._gen = VisaSession(c.generator, c.backend, c.timeout_s, "function generator")
            self._dig = VisaSession(c.digitiser, c.backend, c.timeout_s, "digitiser")
            self.identities = (self._gen.check_identity(self.gen_cmd.identify, c.generator_identity_contains),
                               self._dig.check_identity(self.dig_cmd.identify, c.digitiser_identity_contains))
            self._gen.write(self.gen_cmd.clear)
            self._gen.write(self.gen_cmd.output_off)
            self._dig.write(self.dig_cmd.clear)
        except DriverError:
            self.close()
            raise
        return self

    def close(self) -> None:
        for session in (self._gen, self._dig):
            if session is not None:
                if session is self._gen:
                    try:
                        session.write(self.gen_cmd.output_off)
                    except DriverError:
                        pass
                session.close()

    def describe(self) -> dict[str, Any]:
        return {"driver": "scpi_daq", "role": "transceiver", "generator": self.cfg.generator,
                "digitiser": self.cfg.digitiser, "identities": list(self.identities),
                "sample_rate_hz": self.sample_rate_hz, "channels": list(self.channel_names)}

    def silence(self) -> None:
        """Generator outputs off; idempotent."""
        if self._gen is not None and not self._gen.closed:
            self._gen.write(self.gen_cmd.output_off)

    def _sessions(self) -> tuple[VisaSession, VisaSession]:
        if self._gen is None or self._dig is None:
            raise DriverError("SCPI DAQ: not open")
        return self._gen, self._dig

    def play_and_record(self, gate: np.ndarray, tx: np.ndarray) -> Recording:
        gen, dig = self._sessions()
        fs = self.sample_rate_hz
        edges = segment_edges(gate, tx)
        if len(edges.tx_windows) > 1:
            raise DriverError(f"SCPI DAQ: the generator plays one burst per segment; this one has "
                              f"{len(edges.tx_windows)}")
        g = self.gen_cmd
        gen.write(g.output_off)
        if edges.tx_windows:
            start, stop = edges.tx_windows[0]
            burst = burst_parameters(tx[start:stop], fs, start)
            vpp = 2.0 * burst.amplitude_v
            if vpp > self.cfg.max_output_vpp:
                raise DriverError(f"SCPI DAQ: burst of {vpp:.3g} Vpp exceeds max_output_vpp {self.cfg.max_output_vpp:g}")
            cycles = max(1, int(math.floor(burst.n_samples / fs * burst.frequency_hz + 1e-9)))  # never past the pulse
            for command, value in ((g.function_sine, None), (g.frequency, burst.frequency_hz), (g.amplitude_vpp, vpp),
                                   (g.phase_deg, math.degrees(burst.phase_at_start_rad) % 360.0),
                                   (g.burst_cycles, cycles), (g.burst_on, None), (g.trigger_delay_s, start / fs)):
                gen.write(command if value is None else command.format(value=value))
        gen.write(g.marker_delay_s.format(value=edges.switch_off_sample / fs))
        gen.write(g.trigger_bus)
        d = self.dig_cmd
        n = int(gate.size)
        for command, value in ((d.sample_rate, fs), (d.points, n), (d.channels, self.cfg.input_channels),
                               (d.range_v, self.cfg.input_range_v), (d.trigger_external, None), (d.arm, None)):
            dig.write(command if value is None else command.format(value=value))
        gen.check_errors(g.error_query, "programming the burst")
        gen.write(g.output_on)
        started = self._now()
        gen.write(g.trigger)
        deadline = time.monotonic() + n / fs + self.cfg.timeout_s
        while dig.query(d.ready_query).strip() not in ("1", "+1"):
            if time.monotonic() > deadline:
                dig.write(d.abort)
                raise DriverError(f"digitiser at {self.cfg.digitiser}: capture not complete {n / fs + self.cfg.timeout_s:.1f} s "
                                  "after the trigger; is the generator's sync wired to its trigger input?")
            time.sleep(READY_POLL_S)
        gen.write(g.output_off)
        rows = [dig.query_block(d.fetch.format(value=ch), n) for ch in range(1, self.cfg.input_channels + 1)]
        samples = np.stack(rows).astype(np.float32)
        over = np.max(np.abs(samples), axis=1) >= self.cfg.input_range_v
        notes = tuple(f"input at full scale (clipped) on {name}" for name, o in zip(self.channel_names, over) if o)
        return Recording(samples=samples, channel_names=self.channel_names, sample_rate_hz=fs, started_at_s=started,
                         latency_samples=0, overrun=False, notes=notes)
