"""The serial board driver against the board emulator over a real pseudo-terminal."""

from __future__ import annotations

import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
import serial

from controller.config.hardware import SerialBoardConfig
from controller.errors import DriverError
from drivers import board_protocol as bp
from drivers.serial_board import SerialBoard
from transports import ROOT, board_emulator  # noqa: F401 - fixture

pytestmark = pytest.mark.timeout(60)


def config(emulator, **overrides):
    values = dict(port=str(emulator.link), watchdog_s=0.3, heartbeat_s=0.05, reconnect_s=1.5, reply_timeout_s=0.3)
    values.update(overrides)
    return SerialBoardConfig(**values)


@pytest.fixture
def board(board_emulator):
    driver = SerialBoard(config(board_emulator)).open()
    yield driver
    driver.close()


def wait_for(predicate, timeout_s=2.0):
    deadline = time.monotonic() + timeout_s
    while not predicate():
        if time.monotonic() > deadline:
            return False
        time.sleep(0.002)
    return True


def test_handshake_paths_and_sensors(board, board_emulator):
    info = board.describe()
    assert (info["protocol"], info["firmware"], info["board_id"]) == ("1.0", "emu-1.0", "HERON2-SB01")
    board.set_path("polarise")
    assert board_emulator.path == "polarise"
    sensors = board.read_sensors()
    assert set(sensors) == {"coil_temperature_c", "current_sense_a", "battery_v"}
    assert sensors["current_sense_a"] == pytest.approx(board_emulator.load_current_a)
    board.set_path("idle")
    board.set_path("idle")  # idempotent
    assert board_emulator.path == "idle"
    with pytest.raises(DriverError, match="unknown coil path 'drain'"):
        board.set_path("drain")


def test_heartbeat_keeps_the_coil_on_while_the_host_is_busy(board, board_emulator):
    board.set_path("polarise")
    time.sleep(4 * board.cfg.watchdog_s)  # the engine blocked in a long acquisition: no foreground traffic
    assert board_emulator.path == "polarise" and not board_emulator.state.tripped
    assert any(f.startswith("PING") for f in board_emulator.frames_seen)


def test_watchdog_turns_the_coil_off_when_the_host_goes_quiet(board_emulator):
    """A host speaking raw frames, then silent: the board must go idle within the watchdog time."""
    port = serial.Serial(str(board_emulator.link), 115200, timeout=0.5)
    for seq, (word, *args) in enumerate((("HELLO", "1.0"), ("WDOG", 250), ("PATH", "polarise")), start=1):
        last_frame = time.monotonic()  # the board hears it after this instant
        port.write(bp.encode(">", seq, word, *args))
        assert bp.decode(port.readline()).ok
    assert wait_for(lambda: board_emulator.path == "idle", timeout_s=2.0)
    quiet_s = time.monotonic() - last_frame
    assert 0.25 <= quiet_s < 0.25 + 0.15  # the configured watchdog, plus the emulator tick and scheduling
    (when, path, why) = board_emulator.history()[-1]
    assert (path, why) == ("idle", "watchdog") and board_emulator.state.tripped
    port.write(bp.encode(">", 9, "PATH", "polarise"))
    assert bp.decode(port.readline()).args[0] == "TRIPPED"  # latched until the host clears it
    port.close()


def test_a_killed_host_process_leaves_the_coil_off(board_emulator):
    script = textwrap.dedent(f"""
        import sys, time
        sys.path.insert(0, {str(ROOT)!r})
        from controller.config.hardware import SerialBoardConfig
        from drivers.serial_board import SerialBoard
        b = SerialBoard(SerialBoardConfig(port={str(board_emulator.link)!r}, watchdog_s=0.3, heartbeat_s=0.05)).open()
        b.set_path("polarise")
        print("polarising", flush=True)
        time.sleep(60)
    """)
    host = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True)
    try:
        assert host.stdout.readline().strip() == "polarising"
        time.sleep(0.5)
        assert board_emulator.path == "polarise"  # its heartbeat thread keeps the board fed
        host.kill()
        killed = time.monotonic()
        assert wait_for(lambda: board_emulator.path == "idle", timeout_s=2.0)
        assert time.monotonic() - killed < 0.3 + 0.2
    finally:
        host.kill()
        host.wait()


def test_unplug_and_replug_mid_run_is_survived(board, board_emulator):
    board.set_path("polarise")
    board_emulator.unplug()
    time.sleep(0.1)
    board_emulator.replug()
    assert board.read_sensors()["current_sense_a"] > 0
    assert board.reconnects >= 1 and board_emulator.path == "polarise"


def test_a_port_that_never_returns_is_a_clear_error(board, board_emulator):
    board.set_path("polarise")
    board_emulator.unplug()
    with pytest.raises(DriverError, match=r"vanished .* did not come back within 1.5 s"):
        board.read_sensors()
    board_emulator.replug()
    board.set_path("idle")  # the safe state is reachable once it is back
    assert board_emulator.path == "idle"


def test_a_board_that_reset_while_away_voids_the_shot(board, board_emulator):
    board.set_path("polarise")
    board_emulator.unplug()
    board_emulator.power_cycle()
    board_emulator.replug()
    with pytest.raises(DriverError, match="came back in path 'idle', not 'polarise'"):
        board.read_sensors()


@pytest.mark.parametrize("fault, message", [
    ("garbage", "only garbage"), ("silent", "no reply to HELLO"), ("identity", "unexpected identity"),
    ("old-version", "VERSION board speaks 2.x")])
def test_bad_replies_give_a_clear_error_and_no_coil_current(board_emulator, fault, message):
    board_emulator.fault = fault
    with pytest.raises(DriverError, match=message):
        SerialBoard(config(board_emulator, reply_timeout_s=0.2)).open()
    assert board_emulator.path == "idle"


def test_a_missing_port_is_one_line(tmp_path):
    with pytest.raises(DriverError, match=r"cannot open .*nothing-here"):
        SerialBoard(SerialBoardConfig(port=str(tmp_path / "nothing-here"))).open()


def segment(fs=48000.0, off=2400, ramp=10, tail=4800):
    gate = np.r_[np.ones(off), np.linspace(1.0, 0.0, ramp, endpoint=False), np.zeros(tail)]
    return gate, np.zeros_like(gate), fs


def test_marker_triggered_segment_runs_on_the_board_timer(board, board_emulator):
    board.set_path("polarise")
    board.arm_segment(*segment())
    time.sleep(0.02)
    board_emulator.marker()
    assert wait_for(lambda: board_emulator.state.segment_state == "done", timeout_s=1.0)
    assert board.finish_segment() == (False, ())
    paths = [p for _, p, _ in board_emulator.history()]
    assert paths[-3:] == ["polarise", "receive", "idle"]
    off, done = [t for t, p, w in board_emulator.history() if w.startswith("segment")]
    assert done - off == pytest.approx((10 + 4800) / 48000.0, abs=0.01)


def test_a_missing_marker_makes_the_board_switch_off_itself_and_the_shot_bad(board_emulator):
    board = SerialBoard(config(board_emulator)).open()
    try:
        board.set_path("polarise")
        gate, tx, fs = segment(off=480)
        board.arm_segment(gate, tx, fs)
        seg = board_emulator.state.segment
        assert seg.hold_us == 10_000 + 2_000_000  # planned switch-off plus the 2 s margin
        board_emulator.state.segment = bp.SegmentTiming("marker", 50_000, *seg.args()[2:])  # shorten for the test
        assert wait_for(lambda: board_emulator.path == "idle", timeout_s=1.0)
        bad, notes = board.finish_segment()
        assert bad and "marker never arrived" in notes[0]
    finally:
        board.close()


def test_timer_trigger_switches_off_after_the_hold_time(board_emulator):
    board = SerialBoard(config(board_emulator, trigger="timer")).open()
    try:
        board.set_path("polarise")
        board.arm_segment(*segment(off=4800))  # 0.1 s to switch-off
        armed = time.monotonic()
        assert wait_for(lambda: board_emulator.path == "receive", timeout_s=1.0)
        assert time.monotonic() - armed == pytest.approx(0.1, abs=0.03)
        assert wait_for(lambda: board_emulator.path == "idle", timeout_s=1.0)
        bad, notes = board.finish_segment()
        assert not bad and "not locked to the sample clock" in notes[0]
    finally:
        board.close()


def test_every_pulse_of_an_echo_train_gets_a_transmit_window(board, board_emulator):
    """Two pulses (a 90 and a 180) -> SEG carries the first window, SEGTX the second."""
    gate, tx, fs = segment(off=480, tail=9600)
    k = np.arange(tx.size)
    for start, length in ((1000, 96), (3000, 192)):
        tx[start:start + length] = 0.3 * np.cos(2 * np.pi * 2000.0 * k[start:start + length] / fs)
    board.set_path("polarise")
    board.arm_segment(gate, tx, fs)
    assert board_emulator.state.extra_tx_us == [(round((3000 - 480) / fs * 1e6), round(192 / fs * 1e6))]
    board_emulator.marker()
    assert wait_for(lambda: board_emulator.state.segment_state == "done", timeout_s=1.0)
    paths = [p for _, p, w in board_emulator.history() if w.startswith("segment")]
    assert paths == ["receive", "transmit", "receive", "transmit", "receive", "idle"]
    assert board.finish_segment() == (False, ())
