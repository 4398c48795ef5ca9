"""A small RIFF/WAVE reader: PCM 8/16/24/32-bit and IEEE float 32/64-bit, any number of channels.

Layout (Microsoft/IBM Multimedia Programming Interface and Data Specifications 1.0, 1991;
WAVE_FORMAT_EXTENSIBLE from Microsoft's "Multiple channel audio data and WAVE files", 2007):
"RIFF" size "WAVE", then chunks (4-byte id, little-endian 32-bit size, data, a pad byte when
the size is odd).  "fmt " holds format tag (1 PCM, 3 IEEE float, 0xFFFE extensible with the
real tag in the first two bytes of its sub-format GUID), channels, sample rate, block align
and bits per sample; "data" holds interleaved frames.  8-bit PCM is unsigned (offset 128);
wider PCM is signed little-endian.

Samples are returned as float64 in full-scale units: integer PCM is divided by 2^(bits-1),
so the full scale is 1.0 for every format.  Every defect gives an InputError naming the file.
(The writer for exports is controller.export.wav.WavWriter.)
"""

from __future__ import annotations

import struct
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from controller.errors import InputError

FORMAT_PCM = 1
FORMAT_FLOAT = 3
FORMAT_EXTENSIBLE = 0xFFFE


@dataclass(frozen=True)
class WavRecording:
    samples: np.ndarray  # (n_channels, n_frames), full-scale units
    sample_rate_hz: float
    bits_per_sample: int
    encoding: str  # "pcm" or "float"
    full_scale: float = 1.0

    @property
    def n_channels(self) -> int:
        return self.samples.shape[0]


def _chunks(data: bytes, where: str):
    pos = 12
    while pos + 8 <= len(data):
        cid, size = struct.unpack_from("<4sI", data, pos)
        body = data[pos + 8:pos + 8 + size]
        if len(body) < size:
            raise InputError(f"{where}: chunk {cid.decode('latin-1')!r} declares {size} bytes but the file holds "
                             f"{len(body)} (file truncated)")
        yield cid, body, size
        pos += 8 + size + (size & 1)


def _decode(raw: bytes, encoding: str, bits: int, channels: int, where: str) -> np.ndarray:
    width = bits // 8
    frames = len(raw) // (width * channels)
    raw = raw[:frames * width * channels]
    if encoding == "float":
        dtype = {32: "<f4", 64: "<f8"}.get(bits)
        if dtype is None:
            raise InputError(f"{where}: {bits}-bit float samples are not supported (allowed: 32, 64)")
        values = np.frombuffer(raw, dtype=dtype).astype(float)
    elif bits == 8:
        values = (np.frombuffer(raw, dtype=np.uint8).astype(float) - 128.0) / 128.0
    elif bits in (16, 32):
        values = np.frombuffer(raw, dtype=f"<i{width}").astype(float) / 2.0 ** (bits - 1)
    elif bits == 24:
        b = np.frombuffer(raw, dtype=np.uint8).reshape(-1, 3).astype(np.int32)
        ints = b[:, 0] | (b[:, 1] << 8) | (b[:, 2] << 16)
        ints = np.where(ints >= 1 << 23, ints - (1 << 24), ints)
        values = ints.astype(float) / 2.0**23
    else:
        raise InputError(f"{where}: {bits}-bit PCM is not supported (allowed: 8, 16, 24, 32)")
    return values.reshape(frames, channels).T.copy()


def read_wav(path: str | Path) -> WavRecording:
    """Read a WAV file (module docstring); InputError for anything that is not a usable one."""
    where = str(path)
    try:
        data = Path(path).read_bytes()
    except OSError as exc:
        raise InputError(f"{where}: cannot read ({exc.strerror or exc})") from None
    if not data:
        raise InputError(f"{where}: the file is empty (expected a WAV recording)")
    if len(data) < 12 or data[:4] != b"RIFF" or data[8:12] != b"WAVE":
        raise InputError(f"{where}: not a WAV file (no RIFF/WAVE header)")
    fmt = None
    raw = None
    for cid, body, _ in _chunks(data, where):
        if cid == b"fmt ":
            if len(body) < 16:
                raise InputError(f"{where}: 'fmt ' chunk too short ({len(body)} bytes)")
            fmt = body
        elif cid == b"data":
            raw = body
    if fmt is None:
        raise InputError(f"{where}: no 'fmt ' chunk before the data (file truncated or not a WAV recording)")
    if raw is None:
        raise InputError(f"{where}: no 'data' chunk (file truncated?)")
    tag, channels, rate, _, block_align, bits = struct.unpack_from("<HHIIHH", fmt)
    if tag == FORMAT_EXTENSIBLE:
        if len(fmt) < 26:
            raise InputError(f"{where}: extensible 'fmt ' chunk too short")
        tag = struct.unpack_from("<H", fmt, 24)[0]
    encoding = {FORMAT_PCM: "pcm", FORMAT_FLOAT: "float"}.get(tag)
    if encoding is None:
        raise InputError(f"{where}: sample format tag {tag} is not supported (allowed: PCM, IEEE float)")
    if channels < 1 or rate <= 0 or bits % 8 or bits == 0:
        raise InputError(f"{where}: bad format ({channels} channels, {rate} Hz, {bits} bits)")
    if block_align and block_align != channels * bits // 8:
        raise InputError(f"{where}: block align {block_align} does not match {channels} x {bits} bits")
    samples = _decode(raw, encoding, bits, channels, where)
    if samples.shape[1] == 0:
        raise InputError(f"{where}: the data chunk holds no samples")
    return WavRecording(samples=samples, sample_rate_hz=float(rate), bits_per_sample=bits, encoding=encoding)
