"""The WAV reader against scipy.io.wavfile (an independent reader) and on broken files."""

import struct

import numpy as np
import pytest
from scipy.io import wavfile

from controller.analysis.wavfile import read_wav
from controller.export.wav import WavWriter
from controller.errors import InputError


@pytest.mark.parametrize("dtype,scale", [(np.int16, 2.0**15), (np.int32, 2.0**31), (np.float32, 1.0)])
def test_matches_scipy_reader(tmp_path, dtype, scale):
    # source: scipy.io.wavfile as an independent reference implementation of RIFF/WAVE
    rng = np.random.default_rng(1)
    data = rng.uniform(-0.9, 0.9, size=(500, 3))
    raw = (data * scale).astype(dtype) if dtype != np.float32 else data.astype(np.float32)
    path = tmp_path / "x.wav"
    wavfile.write(path, 44100, raw)
    ours = read_wav(path)
    rate, ref = wavfile.read(path)
    assert ours.sample_rate_hz == rate == 44100
    assert ours.samples.shape == (3, 500)
    np.testing.assert_array_equal(ours.samples, ref.T.astype(float) / scale)


def test_24_bit_extensible_from_the_exporter_and_scipy_agrees(tmp_path):
    # source: scipy.io.wavfile reads 24-bit PCM (as int32 shifted left by 8 bits)
    rng = np.random.default_rng(2)
    data = np.round(rng.uniform(-0.99, 0.99, size=(2, 1001)) * 2**23) / 2**23
    path = tmp_path / "x24.wav"
    with WavWriter(path, 96000, 2, "pcm24", comment="Heron-2 test") as w:
        w.write(data)
    ours = read_wav(path)
    assert ours.bits_per_sample == 24 and ours.sample_rate_hz == 96000
    np.testing.assert_array_equal(ours.samples, data)
    rate, ref = wavfile.read(path)
    assert rate == 96000
    np.testing.assert_array_equal(ref.T.astype(float) / 2.0**31, data)


def test_extensible_header(tmp_path):
    # WAVE_FORMAT_EXTENSIBLE: tag 0xFFFE, the real format in the sub-format GUID's first bytes
    samples = np.array([0, 1000, -1000, 32767], dtype="<i2")
    fmt = struct.pack("<HHIIHHHHIH14s", 0xFFFE, 1, 8000, 16000, 2, 16, 22, 16, 4, 1, b"\x00" * 14)
    body = samples.tobytes()
    chunks = b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", len(body)) + body
    path = tmp_path / "ext.wav"
    path.write_bytes(b"RIFF" + struct.pack("<I", 4 + len(chunks)) + b"WAVE" + chunks)
    np.testing.assert_array_equal(read_wav(path).samples[0], samples / 32768.0)


@pytest.mark.parametrize("content,words", [
    (b"", "empty"),
    (b"this is not audio at all", "not a WAV"),
])
def test_bad_files(tmp_path, content, words):
    path = tmp_path / "bad.wav"
    path.write_bytes(content)
    with pytest.raises(InputError, match=words):
        read_wav(path)


def test_truncated_file(tmp_path):
    path = tmp_path / "t.wav"
    wavfile.write(path, 48000, np.zeros(1000, dtype=np.int16))
    data = path.read_bytes()
    path.write_bytes(data[:len(data) // 2])
    with pytest.raises(InputError, match="truncated"):
        read_wav(path)
    path.write_bytes(data[:30])  # cut inside the fmt chunk
    with pytest.raises(InputError, match="truncated"):
        read_wav(path)
