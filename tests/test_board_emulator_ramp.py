"""The emulated board's coil current falls along the commanded switch-off ramp (over a real pty)."""

from __future__ import annotations

import time

import numpy as np
import pytest

from drivers.serial_board import SerialBoard
from tests.test_serial_board import config, wait_for
from transports import board_emulator  # noqa: F401 - fixture

pytestmark = pytest.mark.timeout(60)

FS = 48000.0
RAMP_S = 0.3


def expected_fraction(shape: str, k: np.ndarray) -> np.ndarray:
    # common practice, no source: linear g = 1 - k, exponential g = exp(-5 k) cut to 0 at the
    # ramp's end (the same commanded gate as controller/sequences/render.py)
    return np.where(k < 1.0, 1.0 - k if shape == "linear" else np.exp(-5.0 * k), 0.0)


def gate_with_ramp(shape: str, off: int = 960, tail_s: float = 0.6) -> tuple[np.ndarray, np.ndarray, float]:
    ramp_n = int(RAMP_S * FS)
    k = np.arange(ramp_n) / ramp_n
    ramp = 1.0 - k if shape == "linear" else np.exp(-5.0 * k)
    gate = np.r_[np.ones(off), ramp, np.zeros(int(tail_s * FS))]
    return gate, np.zeros_like(gate), FS


@pytest.mark.parametrize("shape", ["linear", "exponential"])
def test_emulated_current_follows_the_commanded_ramp(board_emulator, shape):
    board = SerialBoard(config(board_emulator, trigger="timer")).open()
    try:
        board.set_path("polarise")
        board.arm_segment(*gate_with_ramp(shape))
        seg = board_emulator.state.segment
        assert seg.shape == shape
        assert seg.ramp_us == pytest.approx(RAMP_S * 1e6, abs=2e6 / FS)  # to a sample or two
        ramp_s = seg.ramp_us * 1e-6
        assert wait_for(lambda: board_emulator.state.off_at_s is not None, timeout_s=1.0)
        off_s = board_emulator.state.off_at_s
        k = np.r_[np.linspace(0.0, 0.95, 20), 1.05, 1.2]  # not exactly at the cut, k = 1
        modelled = [board_emulator.coil_current_a(off_s + x * ramp_s) for x in k]
        expected = board_emulator.load_current_a * expected_fraction(shape, k)
        assert modelled == pytest.approx(expected, rel=1e-9, abs=1e-9)
        # the current sensor read over the link lies on the ramp between request and reply
        readings = 0
        while time.monotonic() < off_s + 0.9 * ramp_s:
            before = time.monotonic()
            sensed = board.read_sensors()["current_sense_a"]
            after = time.monotonic()
            lo, hi = (board_emulator.load_current_a * expected_fraction(shape, np.array([(t - off_s) / ramp_s]))[0]
                      for t in (after, before))
            if before >= off_s:
                assert lo - 2e-3 <= sensed <= hi + 2e-3  # SENS prints 3 decimals
                readings += 1
            time.sleep(0.02)
        assert readings >= 3
        assert wait_for(lambda: board_emulator.coil_current_a() == 0.0, timeout_s=1.0)
        assert board.read_sensors()["current_sense_a"] == 0.0
    finally:
        board.close()

