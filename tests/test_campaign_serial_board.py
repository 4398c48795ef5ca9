"""A serial switch board that vanishes between runs and comes back: the campaign waits, reconnects, continues.

Real transports: the serial board driver (drivers/serial_board.py) on a pseudo-terminal served
by the board emulator (drivers/emulators/board.py), unplugged (its pty closed, the stable link
gone) and replugged (a new pty behind the same link), on the wall clock.  The supply and
transceiver are the simulator's, so no sound card is needed; the board runs the segment on its
own timer.
"""

from __future__ import annotations

import json
import sqlite3
import threading

import pytest

from campaign_setup import write_schedule
from controller.campaign.service import CampaignService
from controller.clock import WallClock
from controller.config.hardware import SerialBoardConfig
from controller.config.loader import load_rig
from controller.config.schedule import load_schedule
from controller.records import RunFinished
from controller.rig import Rig
from controller.store import Store
from controller.supervisor.latch import TripLatch
from drivers.serial_board import SerialBoard
from drivers.simulated.host import SimulatedHost
from drivers.simulated.instrument import SimulatedInstrument
from drivers.simulated.supply import SimulatedSupply
from drivers.simulated.transceiver import SimulatedTransceiver
from sequence_rigs import DEMO_RIG
from transports import board_emulator  # noqa: F401 - fixture

pytestmark = pytest.mark.timeout(60)
UNPLUGGED_S = 2.5


def test_serial_board_unplugged_between_runs_and_replugged(tmp_path, board_emulator):
    loaded = load_rig(DEMO_RIG)
    clock = WallClock()
    instrument = SimulatedInstrument(loaded.config, loaded.site, loaded.sample, clock)
    board_cfg = SerialBoardConfig(port=str(board_emulator.link), reply_timeout_s=0.2, reconnect_s=0.3,
                                  trigger="timer")
    attempts: list[float] = []

    def open_rig() -> Rig:  # what build_rig does for a hardware rig: open every driver again
        attempts.append(clock.now())
        board = SerialBoard(board_cfg).open()
        return Rig(name=loaded.config.name, supply=SimulatedSupply(instrument),
                   transceiver=SimulatedTransceiver(instrument), board=board, simulated=True,
                   instrument=instrument, host=SimulatedHost(instrument))

    schedule = load_schedule(write_schedule(tmp_path / "config", count=3, every_s=2.0,
                                            campaign="device_wait_s = 30.0\nretry_every_s = 0.5\n", shots=1))
    store = Store(tmp_path / "campaign.sqlite")
    service = CampaignService(schedule, loaded, store, clock, open_rig, TripLatch(loaded.config.name, tmp_path / "st"))
    unplugged: list[float] = []

    def pull_the_lead(prepared):
        def sink(record):
            if isinstance(record, RunFinished) and not unplugged:  # between the first and the second run
                unplugged.append(clock.now())
                board_emulator.unplug()
                threading.Timer(UNPLUGGED_S, board_emulator.replug).start()
        return [sink]

    service.run_sinks = pull_the_lead
    try:
        outcome = service.run()
    finally:
        store.close()
    assert (outcome.status, outcome.runs_done) == ("completed", 3), outcome.reason
    con = sqlite3.connect(tmp_path / "campaign.sqlite")
    runs = con.execute("SELECT exit_status, started_at_s FROM runs ORDER BY started_at_s").fetchall()
    assert [status for status, _ in runs] == ["completed"] * 3
    assert runs[1][1] >= unplugged[0] + UNPLUGGED_S  # nothing ran while the board was away
    ((start_s, end_s, reason),) = con.execute("SELECT start_s, end_s, reason FROM gaps").fetchall()
    assert "serial board" in reason and "back after" in reason
    assert end_s - start_s >= UNPLUGGED_S - 2.0  # from the probe that found it gone to its return
    events = [json.loads(d)["event"] for (d,) in con.execute(
        "SELECT detail_json FROM maintenance WHERE action = 'campaign' ORDER BY rowid")]
    assert events == ["start", "device_lost", "device_back", "end"]
    con.close()
    # the first open, at least one attempt that failed while it was unplugged (every 0.5 s), the one that worked
    assert len(attempts) >= 3 and all(b - a >= 0.45 for a, b in zip(attempts[1:], attempts[2:]))
    assert board_emulator.path == "idle"
