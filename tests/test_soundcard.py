"""The sound-card transceiver on a real audio server: JACK with its dummy backend, ports wired in loopback.

Wiring: PortAudio:out_0 (pulse) -> in_1 (reference), PortAudio:out_1 (marker) -> in_0 (signal).
The dummy backend delays a loopback by exactly one period (TESTING.md, measured on this
kind of machine), so the calibration must find JACK_PERIOD samples.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from controller.config.hardware import SoundCardConfig
from controller.errors import DriverError
from drivers.loopback_calibration import chirp, measure_latency_samples, read_calibration, write_calibration
from drivers.soundcard import SoundCardTransceiver, calibrate_latency, marker_waveform
from transports import JACK_PERIOD, JACK_RATE_HZ, ROOT, jack_server  # noqa: F401 - fixture

pytestmark = pytest.mark.timeout(60)
CARD = SoundCardConfig(device="system", host_api="JACK", pulse_out=0, marker_out=1, signal_in=0, reference_in=(1,),
                       output_full_scale_v=2.0, input_full_scale_v=1.0)


@pytest.fixture
def card(jack_server):
    transceiver = SoundCardTransceiver(CARD, JACK_RATE_HZ, None).open()
    jack_server.unwire_portaudio()
    outs, ins = jack_server.portaudio_ports(output=True), jack_server.portaudio_ports(output=False)
    jack_server.connect(outs[0], ins[1])
    jack_server.connect(outs[1], ins[0])
    yield transceiver
    transceiver.close()


def segment(n_off=2400, n_after=9600, pulse=(4000, 480, 1500.0, 0.8)):
    gate = np.r_[np.ones(n_off), np.zeros(n_after)]
    tx = np.zeros_like(gate)
    start, length, f, amplitude = pulse
    k = np.arange(start, start + length)
    tx[k] = amplitude * np.cos(2 * np.pi * f * k / JACK_RATE_HZ)
    return gate, tx


def test_latency_measurement_is_exact_offline():
    """The correlation finds a known shift in noise to the sample [calc]."""
    rng = np.random.default_rng(3)
    sent = chirp(48000.0)
    received = np.r_[np.zeros(777), sent, np.zeros(500)] + rng.normal(0, 0.05, 777 + sent.size + 500)
    lag, peak = measure_latency_samples(sent, received)
    assert lag == 777 and peak > 0.9


def test_calibration_measures_one_jack_period_and_is_stored(card, tmp_path):
    cal = calibrate_latency(card, output_channel=1, input_channel=0)
    assert cal.latency_samples == JACK_PERIOD
    assert cal.correlation > 0.99
    path = tmp_path / "rig.latency.toml"
    write_calibration(path, cal)
    assert read_calibration(path, JACK_RATE_HZ) == cal
    assert read_calibration(tmp_path / "absent.toml", JACK_RATE_HZ) is None


def test_burst_comes_back_sample_accurately_at_a_constant_latency(card):
    card.calibration = calibrate_latency(card, output_channel=0, input_channel=1)
    card.latency_samples = card.calibration.latency_samples
    gate, tx = segment()
    for _ in range(4):
        rec = card.play_and_record(gate, tx)
        if rec.overrun:  # a dummy-backend xrun: the shot is marked bad, as it must be; try the next
            continue
        signal, reference = rec.samples
        assert rec.channel_names == ("signal", "reference")
        # digital loopback: out = tx / 2 V full scale, read back x 1 V full scale
        np.testing.assert_allclose(reference, tx / 2.0, atol=1e-6)
        marker = np.flatnonzero(np.abs(signal) > 0.1)
        assert marker[0] == 2399 and marker[-1] < 2399 + 48  # marker burst starts on the ramp's first sample
        assert rec.latency_samples == JACK_PERIOD and rec.notes == ()
    assert card.describe()["latency_samples"] == JACK_PERIOD


def test_marker_is_a_one_millisecond_burst_at_a_quarter_of_the_rate():
    gate = np.r_[np.ones(100), np.linspace(1, 0, 10, endpoint=False), np.zeros(200)]
    m = marker_waveform(gate, 0.5, 48000.0)
    assert np.all(m[:100] == 0) and np.all(m[148:] == 0)
    np.testing.assert_array_equal(m[100:108], 0.5 * np.array([1, 1, -1, -1, 1, 1, -1, -1]))


def test_an_overrun_marks_the_shot_bad(card):
    import time

    original = card._callback
    stalled = []

    def slow_callback(indata, outdata, frames, t, status):
        if card._job is not None and not stalled:
            stalled.append(True)
            time.sleep(0.2)  # the audio thread misses its deadline
        original(indata, outdata, frames, t, status)

    card._stream.stop()
    card._stream.close()
    import sounddevice as sd

    card._stream = sd.Stream(device=card._stream.device, samplerate=JACK_RATE_HZ, channels=(card.n_in, card.n_out),
                             dtype="float32", callback=slow_callback)
    card._stream.start()
    gate, tx = segment()
    rec = card.play_and_record(gate, tx)
    assert rec.overrun and "over/underrun" in rec.notes[0]


def test_transmit_above_full_scale_is_refused(card):
    gate, tx = segment(pulse=(4000, 480, 1500.0, 2.5))
    with pytest.raises(DriverError, match="exceeds the output's full scale 2 V"):
        card.play_and_record(gate, tx)


def test_an_absent_device_is_one_line(jack_server):
    with pytest.raises(DriverError, match="no device named like 'Heron USB Codec'"):
        SoundCardTransceiver(SoundCardConfig(device="Heron USB Codec"), JACK_RATE_HZ, None).open()
    with pytest.raises(DriverError, match="the channel map needs 4 in / 2 out"):
        SoundCardTransceiver(SoundCardConfig(device="system", host_api="JACK", signal_in=3), JACK_RATE_HZ,
                             None).open()


def test_missing_portaudio_is_one_line():
    code = ("import ctypes.util, sys; ctypes.util.find_library = lambda name: None\n"
            f"sys.path.insert(0, {str(ROOT)!r})\n"
            "from drivers.soundcard import import_sounddevice\n"
            "from controller.errors import DriverError\n"
            "try:\n    import_sounddevice()\nexcept DriverError as exc:\n    print(exc)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=30).stdout
    assert "PortAudio library is missing" in out and "libportaudio2" in out


def test_devices_lists_the_audio_server_serial_ports_and_visa(jack_server, capsys):
    from controller.cli.main import main

    assert main(["devices"]) == 0
    out = capsys.readouterr().out
    assert "sound devices" in out and "'system' on 'JACK Audio Connection Kit': 2 in, 2 out" in out
    assert "serial ports" in out and "VISA resources" in out and "::SOCKET" in out
