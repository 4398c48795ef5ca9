"""The switch/sensor board's line protocol: framing, checksum, parsing (docs/board-protocol.md).

A frame is one ASCII line::

    <kind><seq> <WORD> [arg ...]*<CRC>\\n

kind ``>`` is a request from the host, ``<`` the board's reply (it echoes seq); CRC is
CRC-16/CCITT-FALSE (polynomial 0x1021, initial value 0xFFFF, no reflection, no final XOR) of
every byte before the ``*``, written as four upper-case hex digits.  Pure functions only:
the driver and the board emulator share them.
"""

from __future__ import annotations

import binascii
from dataclasses import dataclass

PROTOCOL_VERSION = (1, 0)
MAX_LINE_BYTES = 200
PATHS = ("idle", "polarise", "transmit", "receive")
SHAPES = ("linear", "exponential")
TRIGGERS = ("marker", "timer")
MAX_EXTRA_TX_WINDOWS = 255  # SEGTX windows after the one in SEG
SEGMENT_STATES = ("none", "armed", "running", "done", "timeout", "aborted")
ERROR_CODES = ("CRC", "SYNTAX", "UNKNOWN", "RANGE", "STATE", "VERSION", "TRIPPED", "HELLO")


class FrameError(ValueError):
    """A line that is not a well-formed frame (bad checksum, bad syntax, too long)."""


def crc16_ccitt_false(data: bytes) -> int:
    """CRC-16/CCITT-FALSE: poly 0x1021, init 0xFFFF, MSB first, no final XOR.

    binascii.crc_hqx computes this CRC given the initial value (check value 0x29B1 for
    b"123456789", Greg Cook's catalogue of parametrised CRC algorithms).
    """
    return binascii.crc_hqx(data, 0xFFFF)


@dataclass(frozen=True)
class Frame:
    kind: str  # ">" request, "<" reply
    seq: int
    word: str
    args: tuple[str, ...]

    @property
    def ok(self) -> bool:
        return self.word == "OK"


def encode(kind: str, seq: int, word: str, *args: object) -> bytes:
    """The bytes of one frame, newline included."""
    if kind not in "<>" or len(kind) != 1:
        raise ValueError(f"frame kind {kind!r}; allowed: '>' or '<'")
    if not 0 <= seq <= 65535:
        raise ValueError(f"sequence number {seq}; allowed: 0 to 65535")
    body = " ".join([f"{kind}{seq}", word, *(str(a) for a in args)])
    if any(c in body for c in "*\n\r") or not body.isascii():
        raise ValueError(f"frame text {body!r} holds a reserved or non-ASCII character")
    line = f"{body}*{crc16_ccitt_false(body.encode('ascii')):04X}\n".encode("ascii")
    if len(line) > MAX_LINE_BYTES:
        raise ValueError(f"frame of {len(line)} bytes; allowed: at most {MAX_LINE_BYTES}")
    return line


def decode(line: bytes) -> Frame:
    """Parse one line (with or without its newline); raises FrameError naming the defect."""
    text_bytes = line.rstrip(b"\r\n")
    if len(text_bytes) > MAX_LINE_BYTES:
        raise FrameError(f"line of {len(text_bytes)} bytes is too long (at most {MAX_LINE_BYTES})")
    try:
        text = text_bytes.decode("ascii")
    except UnicodeDecodeError:
        raise FrameError(f"non-ASCII bytes in {text_bytes[:40]!r}") from None
    body, star, crc_text = text.rpartition("*")
    if not star or len(crc_text) != 4:
        raise FrameError(f"no '*XXXX' checksum at the end of {text[:60]!r}")
    try:
        crc = int(crc_text, 16)
    except ValueError:
        raise FrameError(f"checksum {crc_text!r} is not hexadecimal") from None
    if crc != crc16_ccitt_false(body.encode("ascii")):
        raise FrameError(f"checksum mismatch in {text[:60]!r}")
    parts = body.split()
    if len(parts) < 2 or parts[0][:1] not in "<>" or not parts[0][1:].isdigit():
        raise FrameError(f"malformed frame {text[:60]!r}")
    return Frame(kind=parts[0][0], seq=int(parts[0][1:]), word=parts[1], args=tuple(parts[2:]))


def parse_pairs(args: tuple[str, ...]) -> dict[str, str]:
    """`key=value` arguments as a dict; raises FrameError on an argument without '='."""
    out = {}
    for a in args:
        key, eq, value = a.partition("=")
        if not eq or not key:
            raise FrameError(f"argument {a!r} is not key=value")
        out[key] = value
    return out


@dataclass(frozen=True)
class SegmentTiming:
    """What the board does on its own timer once the segment starts (times in microseconds).

    hold_us: the longest the board waits for the marker (trigger "marker"), or the time
    from the SEG command to switch-off (trigger "timer").  tx_start_us is counted from
    switch-off; tx_len_us = 0 means no transmit window.  receive_us: from switch-off until
    the board returns the coil to idle.
    """

    trigger: str
    hold_us: int
    ramp_us: int
    shape: str
    tx_start_us: int
    tx_len_us: int
    receive_us: int

    def args(self) -> tuple[object, ...]:
        return (self.trigger, self.hold_us, self.ramp_us, self.shape, self.tx_start_us, self.tx_len_us,
                self.receive_us)

    @classmethod
    def from_args(cls, args: tuple[str, ...]) -> "SegmentTiming":
        """Parse SEG arguments; raises ValueError naming the bad one."""
        if len(args) != 7:
            raise ValueError(f"SEG takes 7 arguments, got {len(args)}")
        trigger, hold, ramp, shape, tx_start, tx_len, receive = args
        if trigger not in TRIGGERS:
            raise ValueError(f"trigger {trigger!r}; allowed: {', '.join(TRIGGERS)}")
        if shape not in SHAPES:
            raise ValueError(f"shape {shape!r}; allowed: {', '.join(SHAPES)}")
        numbers = []
        for name, text in (("hold_us", hold), ("ramp_us", ramp), ("tx_start_us", tx_start),
                           ("tx_len_us", tx_len), ("receive_us", receive)):
            if not text.isdigit() or int(text) > 600_000_000:
                raise ValueError(f"{name} {text!r}; allowed: 0 to 600000000")
            numbers.append(int(text))
        hold_us, ramp_us, tx_start_us, tx_len_us, receive_us = numbers
        return cls(trigger, hold_us, ramp_us, shape, tx_start_us, tx_len_us, receive_us)
