"""WAV (RIFF WAVE) writer for raw shots: one channel per recorded channel, shots back to back.

Layout per the Microsoft RIFF/WAVE specification (Multimedia Programming Interface and Data
Specifications 1.0, 1991) and its WAVE_FORMAT_EXTENSIBLE addendum:
  float32: fmt tag 3 (WAVE_FORMAT_IEEE_FLOAT), 32 bits, plus the `fact` chunk (frames);
  pcm24:   fmt tag 0xFFFE (WAVE_FORMAT_EXTENSIBLE, required above 16 bits) with the PCM
           sub-format GUID, 24 valid bits, little-endian two's complement.
A sample is the converter voltage divided by the converter's full-scale voltage, so 1.0 is
full scale; pcm24 clips at full scale (counted) and rounds to 1/2^23.
The file is streamed: sizes are written as 0 and patched on close, so a run of any length
goes through in constant memory (up to the 4 GiB a RIFF size field can hold).
"""

from __future__ import annotations

import struct
from pathlib import Path
from typing import BinaryIO

import numpy as np

from controller.errors import InputError

ENCODINGS = ("float32", "pcm24")
WAVE_FORMAT_IEEE_FLOAT = 3
WAVE_FORMAT_EXTENSIBLE = 0xFFFE
# KSDATAFORMAT_SUBTYPE_PCM: 00000001-0000-0010-8000-00aa00389b71
PCM_SUBFORMAT_GUID = struct.pack("<IHH", 1, 0, 0x10) + bytes([0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71])
RIFF_LIMIT_BYTES = 2**32 - 1


class WavWriter:
    """Stream frames (n_channels, n) of full-scale-relative samples into a WAV file."""

    def __init__(self, path: str | Path, sample_rate_hz: float, n_channels: int, encoding: str = "float32",
                 comment: str = "") -> None:
        if encoding not in ENCODINGS:
            raise InputError(f"WAV encoding {encoding!r} is not known; allowed: {', '.join(ENCODINGS)}")
        if abs(sample_rate_hz - round(sample_rate_hz)) > 1e-9:
            raise InputError(f"sample rate {sample_rate_hz} Hz is not a whole number; a WAV file needs one")
        self.path = Path(path)
        self.encoding = encoding
        self.n_channels = n_channels
        self.bytes_per_sample = 4 if encoding == "float32" else 3
        self.frames = 0
        self.clipped = 0
        self.comment = comment
        self._file: BinaryIO = open(self.path, "wb")
        self._write_header(int(round(sample_rate_hz)))

    def _write_header(self, rate: int) -> None:
        block = self.n_channels * self.bytes_per_sample
        if self.encoding == "float32":
            fmt = struct.pack("<HHIIHHH", WAVE_FORMAT_IEEE_FLOAT, self.n_channels, rate, rate * block, block, 32, 0)
        else:
            fmt = struct.pack("<HHIIHHHHI", WAVE_FORMAT_EXTENSIBLE, self.n_channels, rate, rate * block, block, 24,
                              22, 24, 0) + PCM_SUBFORMAT_GUID
        f = self._file
        f.write(b"RIFF" + struct.pack("<I", 0) + b"WAVE")
        f.write(b"fmt " + struct.pack("<I", len(fmt)) + fmt)
        self._fact_at = None
        if self.encoding == "float32":
            self._fact_at = f.tell() + 8
            f.write(b"fact" + struct.pack("<II", 4, 0))
        self._data_size_at = f.tell() + 4
        f.write(b"data" + struct.pack("<I", 0))
        self._data_start = f.tell()

    def write(self, frames: np.ndarray) -> None:
        """Append samples shaped (n_channels, n), 1.0 = converter full scale."""
        x = np.asarray(frames, dtype=float)
        if x.ndim != 2 or x.shape[0] != self.n_channels:
            raise InputError(f"WAV frames must be ({self.n_channels}, n); got {x.shape}")
        if self._data_start + (self.frames + x.shape[1]) * self.n_channels * self.bytes_per_sample > RIFF_LIMIT_BYTES:
            raise InputError(f"{self.path}: more than 4 GiB of samples; export fewer shots (--run or --from/--to)")
        interleaved = x.T
        if self.encoding == "float32":
            data = np.ascontiguousarray(interleaved, dtype="<f4").tobytes()
        else:
            scaled = np.rint(interleaved * 2**23)
            self.clipped += int(np.count_nonzero((scaled > 2**23 - 1) | (scaled < -(2**23))))
            ints = np.ascontiguousarray(np.clip(scaled, -(2**23), 2**23 - 1), dtype="<i4")
            data = ints.view(np.uint8).reshape(-1, 4)[:, :3].tobytes()
        self._file.write(data)
        self.frames += x.shape[1]

    def close(self) -> None:
        f = self._file
        data_bytes = self.frames * self.n_channels * self.bytes_per_sample
        if data_bytes % 2:
            f.write(b"\0")
        if self.comment:
            text = self.comment.encode("ascii", "replace") + b"\0"
            text += b"\0" * (len(text) % 2)
            info = b"INFO" + b"ICMT" + struct.pack("<I", len(text)) + text
            f.write(b"LIST" + struct.pack("<I", len(info)) + info)
        end = f.tell()
        f.seek(4)
        f.write(struct.pack("<I", end - 8))
        if self._fact_at is not None:
            f.seek(self._fact_at)
            f.write(struct.pack("<I", self.frames))
        f.seek(self._data_size_at)
        f.write(struct.pack("<I", data_bytes))
        f.close()

    def __enter__(self) -> "WavWriter":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
