"""A campaign service on the simulated Heron-2 rig and a virtual clock, for in-process campaign tests.

The rig factory hands back the same simulated rig every time, so faults injected into its
instrument (with onset and end times on the virtual clock) persist across reconnection
attempts, as a real device that is away stays away however often it is reopened.
"""

from __future__ import annotations

import dataclasses
import sqlite3
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from controller.campaign.service import CampaignService
from controller.clock import VirtualClock
from controller.config.loader import LoadedRig, load_rig
from controller.config.schedule import load_schedule
from controller.rig import Rig, build_rig
from controller.store import Store
from controller.supervisor.latch import TripLatch
from sequence_rigs import DEMO_RIG

START_S = 1_782_043_200.0  # 2026-06-21 12:00 UTC, on the 10 s slot grid
QUICK_FID = ('name = "quick-fid"\nkind = "fid"\nshots = {shots}\nrecovery_s = 0.1\n'
             '[polarise]\ncurrent_a = 2.0\nduration_s = 0.5\n[receive]\ndead_time_s = 0.015\nacquire_s = 0.3\n')


@dataclass
class Setup:
    service: CampaignService
    rig: Rig
    store: Store
    clock: VirtualClock
    latch: TripLatch
    factory_calls: list[float]

    @property
    def faults(self) -> Any:
        return self.rig.instrument.faults

    def coil_off(self) -> bool:
        inst = self.rig.instrument
        return inst.coil_current_a() == 0.0 and not inst.output_on

    def query(self, sql: str, *params: Any) -> list[tuple]:
        con = sqlite3.connect(self.store.path)
        try:
            return con.execute(sql, params).fetchall()
        finally:
            con.close()


def with_supervisor(loaded: LoadedRig, **changes: Any) -> LoadedRig:
    cfg = loaded.config
    return dataclasses.replace(loaded, config=dataclasses.replace(
        cfg, supervisor=dataclasses.replace(cfg.supervisor, **changes)))


def write_schedule(folder: Path, count: int, campaign: str = "", every_s: float = 10.0, extra: str = "",
                   shots: int = 2) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "fid.toml").write_text(QUICK_FID.format(shots=shots))
    path = folder / "schedule.toml"
    defaults = "".join(line for line in ("disk_reserve_mb = 200.0\n", "retry_every_s = 5.0\n")
                       if line.split(" =")[0] not in campaign)
    path.write_text(f'name = "svc-test"\nsequence = "fid.toml"\nevery_s = {every_s}\ncount = {count}\n{extra}'
                    f'[campaign]\n{defaults}{campaign}')
    return path


def make_campaign(tmp_path: Path, count: int, campaign: str = "", loaded: LoadedRig | None = None,
                  store_dir: Path | None = None, start_s: float = START_S, extra: str = "", shots: int = 2) -> Setup:
    schedule = load_schedule(write_schedule(tmp_path / "config", count, campaign, extra=extra, shots=shots))
    loaded = loaded or load_rig(DEMO_RIG)
    clock = VirtualClock(start_epoch_s=start_s)
    rig = build_rig(loaded, clock)
    store = Store((store_dir or tmp_path) / "campaign.sqlite")
    latch = TripLatch(loaded.config.name, tmp_path / "state")
    calls: list[float] = []

    def factory() -> Rig:
        calls.append(clock.now())
        return rig

    service = CampaignService(schedule, loaded, store, clock, factory, latch)
    return Setup(service, rig, store, clock, latch, calls)
