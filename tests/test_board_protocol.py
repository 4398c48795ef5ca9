"""The board line protocol: checksum, framing, and the segment timing read back from waveforms."""

from __future__ import annotations

import pytest

from controller.config.schema import FidSequence, PolariseSpec, PulseSpec, ReceiveSpec, SwitchOffSpec
from controller.sequences.compile import compile_sequence
from controller.sequences.render import render_segment
from controller.sequences.timeline import Pulse, SwitchOff
from drivers import board_protocol as bp
from drivers.segment import segment_edges


def test_crc_matches_the_published_check_value():
    # source: Greg Cook, "Catalogue of parametrised CRC algorithms", CRC-16/CCITT-FALSE: check = 0x29B1
    assert bp.crc16_ccitt_false(b"123456789") == 0x29B1


def test_frame_round_trip_and_every_damage_is_caught():
    line = bp.encode(">", 42, "SEG", "marker", 1000, 200, "linear", 0, 0, 5000)
    assert line.endswith(b"\n") and line.startswith(b">42 SEG marker")
    frame = bp.decode(line)
    assert (frame.kind, frame.seq, frame.word, frame.args) == (">", 42, "SEG", ("marker", "1000", "200", "linear",
                                                                                  "0", "0", "5000"))
    for i in range(len(line) - 1):  # flip one bit anywhere before the newline
        damaged = bytearray(line)
        damaged[i] ^= 0x04
        with pytest.raises(bp.FrameError):
            bp.decode(bytes(damaged))


@pytest.mark.parametrize("bad", [b"", b"hello\n", b">1 PING*ZZZZ\n", b">1 PING\n", b"\xff\xfe*0000\n",
                                 b">" + b"A" * 300 + b"*0000\n"])
def test_malformed_lines_are_rejected(bad):
    with pytest.raises(bp.FrameError):
        bp.decode(bad)


def test_encode_refuses_reserved_characters_and_bad_sequence_numbers():
    with pytest.raises(ValueError):
        bp.encode(">", 1, "PATH", "idle*")
    with pytest.raises(ValueError):
        bp.encode(">", 70000, "PING")


def test_segment_arguments_are_validated():
    good = bp.SegmentTiming("timer", 5000, 200, "linear", 10000, 4000, 500000)
    assert bp.SegmentTiming.from_args(tuple(str(a) for a in good.args())) == good
    for bad in (("gate", "1", "1", "linear", "0", "0", "1"), ("timer", "-1", "1", "linear", "0", "0", "1"),
                ("timer", "1", "1", "square", "0", "0", "1"), ("timer",)):
        with pytest.raises(ValueError):
            bp.SegmentTiming.from_args(bad)


@pytest.mark.parametrize("shape", ["linear", "exponential"])
def test_segment_edges_agree_with_the_compiled_timeline(shape):
    spec = FidSequence(name="t", polarise=PolariseSpec(current_a=1.0, duration_s=0.5),
                       switch_off=SwitchOffSpec(ramp_s=0.01, shape=shape),
                       pulse=PulseSpec(duration_s=0.005, amplitude_v=0.3, frequency_hz=2000.0, delay_s=0.01),
                       receive=ReceiveSpec(dead_time_s=0.01, acquire_s=0.2))
    fs = 48000.0
    shot = compile_sequence(spec, fs).shots[0]
    waves = render_segment(shot, fs)
    edges = segment_edges(waves.gate, waves.tx)
    (off,) = shot.of_kind(SwitchOff)
    (pulse,) = shot.of_kind(Pulse)
    assert edges.switch_off_sample == off.start_sample
    assert edges.ramp_end_sample == off.start_sample + round(off.ramp_s * fs)
    assert edges.shape == shape
    (window,) = edges.tx_windows
    assert window[0] >= pulse.start_sample and window[1] <= pulse.start_sample + pulse.n_samples
    assert window[1] - window[0] >= pulse.n_samples - 2  # cos may be exactly 0 on an end sample
