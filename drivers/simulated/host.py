"""The simulated rig's host readings, with the host faults of Faults.

Real free space is reported unless `disk_full` is active.  When `store_write_failure`
becomes active the store's own SQLite connection is capped at its present size
(PRAGMA max_page_count), so the next write that needs a page fails inside SQLite with
"database or disk is full": a real failure of the real store, not a stand-in.
"""

from __future__ import annotations

from typing import Any

from controller.supervisor.host import LocalHost
from drivers.simulated.instrument import SimulatedInstrument

FULL_DISK_FREE_MB = 0.5


class SimulatedHost:
    def __init__(self, instrument: SimulatedInstrument) -> None:
        self.inst = instrument
        self.local = LocalHost()

    def readings(self, store: Any) -> dict[str, float]:
        now = self.inst.clock.now()
        faults = self.inst.faults
        readings = self.local.readings(store)
        if store is not None and faults.active("store_write_failure", now):
            pages = store.db.execute("PRAGMA page_count").fetchone()[0]
            store.db.execute(f"PRAGMA max_page_count = {int(pages)}")
        if faults.active("disk_full", now):
            readings["disk_free_mb"] = FULL_DISK_FREE_MB
        return readings
