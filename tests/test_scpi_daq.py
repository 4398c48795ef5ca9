"""The function-generator + digitiser transceiver over pyvisa-py against the loopback emulators."""

from __future__ import annotations

import math

import numpy as np
import pytest

from controller.config.hardware import ScpiDaqConfig
from controller.config.schema import FidSequence, PolariseSpec, PulseSpec, ReceiveSpec
from controller.errors import DriverError
from controller.sequences.compile import compile_sequence
from controller.sequences.render import render_segment
from controller.sequences.timeline import Pulse
from drivers.emulators.scpi_daq import start_pair
from drivers.scpi_daq import ScpiDaqTransceiver, burst_parameters
from drivers.segment import segment_edges

pytestmark = pytest.mark.timeout(60)
FS = 48000.0


@pytest.fixture
def pair():
    gen, dig = start_pair()
    yield gen, dig
    gen.stop()
    dig.stop()


def config(pair, **overrides):
    gen, dig = pair
    values = dict(generator=f"TCPIP0::127.0.0.1::{gen.port}::SOCKET", digitiser=f"TCPIP0::127.0.0.1::{dig.port}::SOCKET",
                  generator_identity_contains="KFG-2", digitiser_identity_contains="KDG-4", timeout_s=1.0)
    values.update(overrides)
    return ScpiDaqConfig(**values)


def shot(pulse_hz=2087.0, phase_deg=30.0):
    spec = FidSequence(name="t", polarise=PolariseSpec(current_a=1.0, duration_s=0.3),
                       pulse=PulseSpec(duration_s=0.01, amplitude_v=0.4, frequency_hz=pulse_hz, phase_deg=phase_deg,
                                       delay_s=0.005), receive=ReceiveSpec(dead_time_s=0.005, acquire_s=0.2))
    plan = compile_sequence(spec, FS).shots[0]
    return plan, render_segment(plan, FS)


def test_burst_parameters_recover_the_rendered_pulse():
    """The pulse the sequence compiler placed is what the generator is told to play [calc]."""
    plan, waves = shot()
    (pulse,) = plan.of_kind(Pulse)
    (window,) = segment_edges(waves.gate, waves.tx).tx_windows
    burst = burst_parameters(waves.tx[window[0]:window[1]], FS, window[0])
    assert burst.frequency_hz == pytest.approx(pulse.frequency_hz, rel=1e-9)
    assert burst.amplitude_v == pytest.approx(pulse.amplitude_v, rel=1e-9)
    expected_phase = 2 * math.pi * pulse.frequency_hz * window[0] / FS + pulse.phase_rad
    assert math.remainder(burst.phase_at_start_rad - expected_phase, 2 * math.pi) == pytest.approx(0.0, abs=1e-9)


def test_loopback_capture_returns_the_burst_and_the_marker(pair):
    plan, waves = shot()
    daq = ScpiDaqTransceiver(config(pair), FS).open()
    try:
        rec = daq.play_and_record(waves.gate, waves.tx)
    finally:
        daq.close()
    signal, reference = rec.samples
    assert rec.channel_names == ("signal", "reference") and signal.size == waves.n_samples
    (pulse,) = plan.of_kind(Pulse)
    whole_cycles = int(pulse.n_samples / FS * pulse.frequency_hz)  # the driver rounds the burst down
    stop = pulse.start_sample + int(whole_cycles / pulse.frequency_hz * FS)
    np.testing.assert_allclose(signal[:stop], waves.tx[:stop], atol=2e-6)  # float32 transfer, 1 ns delay steps
    assert not np.any(signal[stop + 1:])  # whole cycles only: nothing after the burst
    edges = segment_edges(waves.gate, waves.tx)
    assert np.flatnonzero(reference)[0] == edges.switch_off_sample


def test_wrong_identity_and_vanished_digitiser_are_one_line(pair):
    with pytest.raises(DriverError, match="digitiser at .* does not contain 'XYZ'"):
        ScpiDaqTransceiver(config(pair, digitiser_identity_contains="XYZ"), FS).open()
    daq = ScpiDaqTransceiver(config(pair), FS).open()
    pair[1].stop()
    _, waves = shot()
    with pytest.raises(DriverError, match="digitiser at TCPIP0::127.0.0.1"):
        daq.play_and_record(waves.gate, waves.tx)
    daq.silence()
    daq.close()


def test_a_burst_above_the_output_limit_is_refused(pair):
    _, waves = shot()
    daq = ScpiDaqTransceiver(config(pair, max_output_vpp=0.5), FS).open()
    with pytest.raises(DriverError, match="exceeds max_output_vpp 0.5"):
        daq.play_and_record(waves.gate, waves.tx)
    daq.close()
