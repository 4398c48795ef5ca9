"""A sound card as transceiver: one full-duplex stream (sounddevice / PortAudio), one sample clock.

The stream runs from `open()` to `close()`, playing silence between segments.  A segment
is handed to the audio callback as a job: from the next block on, the callback writes the
job's output frames and stores the input frames of the same callbacks, so output sample k
and input sample k share one converter clock.  The input lags the output by the loopback
latency (`precess rig calibrate`), which is removed before the Recording is returned.

Outputs: `pulse_out` carries the transmit waveform (volts / output_full_scale_v);
`marker_out` carries the switch-off marker, a 1 ms burst at fs/4 starting on the first
sample of the switch-off ramp (docs/marker-circuit.md: an AC-coupled sound card cannot hold
a level, but a burst detector turns it into a clean edge).  Any over- or underrun during a
segment marks the shot bad.  sounddevice is imported lazily so a machine without PortAudio
can still run simulated rigs.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from controller.config.hardware import SoundCardConfig
from controller.errors import DriverError
from drivers.loopback_calibration import LatencyCalibration
from drivers.protocols import Recording
from drivers.segment import segment_edges

MARKER_BURST_S = 0.001
WARM_UP_S = 0.3
STALL_MARGIN_S = 2.0
CLIP_FRACTION = 0.999


def import_sounddevice() -> Any:
    """sounddevice, or a DriverError saying what is missing."""
    try:
        import sounddevice
    except OSError as exc:
        raise DriverError(f"sound card: the PortAudio library is missing ({exc}); install it "
                          "(Debian/Ubuntu: apt-get install libportaudio2)") from None
    except ImportError as exc:
        raise DriverError(f"sound card: the sounddevice package is missing ({exc})") from None
    return sounddevice


def marker_waveform(gate: np.ndarray, level: float, sample_rate_hz: float) -> np.ndarray:
    """The marker channel: a burst of +L,+L,-L,-L (a square wave at fs/4) for 1 ms from switch-off."""
    edges = segment_edges(gate, np.zeros(0))
    out = np.zeros(edges.n_samples)
    n_burst = max(4, int(round(MARKER_BURST_S * sample_rate_hz)))
    stop = min(edges.n_samples, edges.switch_off_sample + n_burst)
    k = np.arange(stop - edges.switch_off_sample)
    out[edges.switch_off_sample:stop] = level * np.where((k // 2) % 2 == 0, 1.0, -1.0)
    return out


def resolve_device(sd: Any, device: str | int, host_api: str, inputs: int, outputs: int) -> int:
    """Index of the device named (part of its name, any case) or numbered, with enough channels."""
    devices = list(sd.query_devices())
    apis = [a["name"] for a in sd.query_hostapis()]
    if isinstance(device, int):
        if not 0 <= device < len(devices):
            raise DriverError(f"sound card: no device {device}; there are {len(devices)} (see `precess devices`)")
        candidates = [device]
    else:
        candidates = [i for i, d in enumerate(devices) if device.lower() in d["name"].lower()
                      and host_api.lower() in apis[d["hostapi"]].lower()]
        if not candidates:
            raise DriverError(f"sound card: no device named like {device!r}" + (f" on {host_api!r}" if host_api else "")
                              + "; see `precess devices` for the names")
    fitting = [i for i in candidates if devices[i]["max_input_channels"] >= inputs
               and devices[i]["max_output_channels"] >= outputs]
    if not fitting:
        d = devices[candidates[0]]
        raise DriverError(f"sound card {d['name']!r}: has {d['max_input_channels']} in / {d['max_output_channels']} "
                          f"out; the channel map needs {inputs} in / {outputs} out")
    return fitting[0]


@dataclass
class _Job:
    """One segment in flight: output to play, input recorded, flags seen while it ran."""

    out: np.ndarray  # (n, n_out) float32
    inp: np.ndarray  # (n, n_in) float32
    pos: int = 0
    flags: list[str] = field(default_factory=list)
    done: threading.Event = field(default_factory=threading.Event)


class SoundCardTransceiver:
    """See module docstring."""

    def __init__(self, cfg: SoundCardConfig, sample_rate_hz: float, calibration: LatencyCalibration | None,
                 now: Callable[[], float] = time.time) -> None:
        self.cfg = cfg
        self.sample_rate_hz = float(sample_rate_hz)
        self.calibration = calibration
        self.latency_samples = calibration.latency_samples if calibration else 0
        self._now = now
        self.inputs = (cfg.signal_in, *cfg.reference_in)
        refs = [f"reference{i + 1}" if i else "reference" for i in range(len(cfg.reference_in))]
        self.channel_names = ("signal", *refs)
        self.n_in = max(self.inputs) + 1
        self.n_out = max(cfg.pulse_out, cfg.marker_out) + 1
        self._job: _Job | None = None
        self._lock = threading.Lock()
        self._stream: Any = None
        self._sd: Any = None
        self.device_name = ""

    # ---- stream lifecycle -------------------------------------------------------------------
    def open(self) -> "SoundCardTransceiver":
        sd = self._sd = import_sounddevice()
        index = resolve_device(sd, self.cfg.device, self.cfg.host_api, self.n_in, self.n_out)
        info = sd.query_devices(index)
        self.device_name = f"{info['name']} ({sd.query_hostapis(info['hostapi'])['name']})"
        try:
            self._stream = sd.Stream(device=(index, index), samplerate=self.sample_rate_hz,
                                     channels=(self.n_in, self.n_out), dtype="float32",
                                     blocksize=self.cfg.blocksize, callback=self._callback)
            self._stream.start()
        except Exception as exc:  # noqa: BLE001 - PortAudioError and friends become one line
            self._stream = None
            raise DriverError(f"sound card {self.device_name!r}: cannot open a full-duplex stream of "
                              f"{self.n_in} in / {self.n_out} out at {self.sample_rate_hz:g} Hz ({exc})") from None
        # let the stream settle (start-up glitches, audio-server graph changes) before anything counts
        self.play_raw(np.zeros((int(round(WARM_UP_S * self.sample_rate_hz)), self.n_out), dtype=np.float32), 0)
        return self

    def close(self) -> None:
        stream, self._stream = self._stream, None
        if stream is not None:
            try:
                stream.stop()
                stream.close()
            except Exception:  # noqa: BLE001 - closing a broken stream
                pass

    def _callback(self, indata: np.ndarray, outdata: np.ndarray, frames: int, _time: Any, status: Any) -> None:
        outdata.fill(0.0)
        job = self._job
        if job is None or job.done.is_set():
            return
        if status:
            job.flags.append(str(status).strip())
        k = min(frames, job.out.shape[0] - job.pos)
        outdata[:k] = job.out[job.pos:job.pos + k]
        job.inp[job.pos:job.pos + k] = indata[:k]
        job.pos += k
        if job.pos >= job.out.shape[0]:
            job.done.set()

    # ---- the Transceiver protocol ------------------------------------------------------------
    def describe(self) -> dict[str, Any]:
        cal = self.calibration.as_dict() if self.calibration else None
        return {"driver": "soundcard", "role": "transceiver", "device": self.device_name,
                "sample_rate_hz": self.sample_rate_hz, "channels": list(self.channel_names),
                "latency_samples": self.latency_samples, "latency_calibration": cal,
                "pulse_out": self.cfg.pulse_out, "marker_out": self.cfg.marker_out}

    def silence(self) -> None:
        """Drop any segment in flight; the stream plays zeros.  Idempotent."""
        job, self._job = self._job, None
        if job is not None:
            job.done.set()

    def play_raw(self, out: np.ndarray, extra_samples: int) -> tuple[np.ndarray, list[str]]:
        """Play out (n, n_out) in digital units and record n + extra_samples frames of every input."""
        if self._stream is None:
            raise DriverError("sound card: the stream is not open")
        n_total = out.shape[0] + extra_samples
        padded = np.zeros((n_total, self.n_out), dtype=np.float32)
        padded[: out.shape[0]] = out
        job = _Job(out=padded, inp=np.zeros((n_total, self.n_in), dtype=np.float32))
        with self._lock:
            self._job = job
            wait_s = n_total / self.sample_rate_hz + STALL_MARGIN_S
            finished = job.done.wait(wait_s)
            self._job = None
        if not finished or job.pos < n_total:
            raise DriverError(f"sound card {self.device_name!r}: the stream stalled ({job.pos} of {n_total} frames "
                              f"after {wait_s:.1f} s); is the device still there?")
        return job.inp, job.flags

    def play_and_record(self, gate: np.ndarray, tx: np.ndarray) -> Recording:
        fs = self.sample_rate_hz
        full_scale = self.cfg.output_full_scale_v
        peak = float(np.max(np.abs(tx))) if tx.size else 0.0
        if peak > full_scale:
            raise DriverError(f"sound card: transmit peak {peak:.3g} V exceeds the output's full scale "
                              f"{full_scale:g} V (transceiver.soundcard.output_full_scale_v)")
        out = np.zeros((gate.size, self.n_out), dtype=np.float32)
        out[:, self.cfg.pulse_out] = tx / full_scale
        out[:, self.cfg.marker_out] = marker_waveform(gate, self.cfg.marker_level, fs)
        extra = self.latency_samples + int(round(self.cfg.tail_s * fs))
        started = self._now()
        recorded, flags = self.play_raw(out, extra)
        window = recorded[self.latency_samples:self.latency_samples + gate.size, list(self.inputs)]
        samples = (window.T * self.cfg.input_full_scale_v).astype(np.float32)
        notes = []
        if flags:
            notes.append("audio over/underrun during the segment: " + "; ".join(sorted(set(flags))))
        if self.calibration is None:
            notes.append("loopback latency not calibrated (run `precess rig calibrate`); assumed 0 samples")
        clipped = [name for name, row in zip(self.channel_names, window.T) if np.max(np.abs(row)) >= CLIP_FRACTION]
        if clipped:
            notes.append("input at full scale (clipped) on " + ", ".join(clipped))
        return Recording(samples=samples, channel_names=self.channel_names, sample_rate_hz=fs, started_at_s=started,
                         latency_samples=self.latency_samples, overrun=bool(flags), notes=tuple(notes))


def calibrate_latency(card: SoundCardTransceiver, output_channel: int, input_channel: int,
                      repeats: int = 3) -> LatencyCalibration:
    """Play a chirp on output_channel, find it on input_channel (wired back); repeat and insist on one answer."""
    from drivers.loopback_calibration import chirp, measure_latency_samples, now_iso

    fs = card.sample_rate_hz
    test = chirp(fs)
    out = np.zeros((test.size, card.n_out), dtype=np.float32)
    out[:, output_channel] = test
    lags, peaks, xruns = [], [], 0
    while len(lags) < repeats:
        recorded, flags = card.play_raw(out, int(round(0.5 * fs)))
        if flags:
            xruns += 1
            if xruns > 3 * repeats:
                raise DriverError(f"sound card: over/underruns during the calibration ({flags[0]}); "
                                  "close other audio programs and retry")
            continue
        lag, peak = measure_latency_samples(test, recorded[:, input_channel].astype(float))
        lags.append(lag)
        peaks.append(peak)
    if min(peaks) < 0.5:
        raise DriverError(f"sound card: the test chirp did not come back on input {input_channel} "
                          f"(correlation {min(peaks):.2f}); wire output {output_channel} to input {input_channel}")
    if max(lags) - min(lags) > 1:
        raise DriverError(f"sound card: the loopback latency is not stable ({lags} samples); "
                          "a fixed block size (transceiver.soundcard.blocksize) may help")
    return LatencyCalibration(latency_samples=int(np.median(lags)), sample_rate_hz=fs, device=card.device_name,
                              measured_at=now_iso(), correlation=round(min(peaks), 4))
