"""What a campaign checks before each run and after each shot: free disk space and the devices.

Disk: the free space beside the store comes from the same host monitor the supervisor reads
(controller/supervisor/host.py; on a simulated rig, drivers/simulated/host.py with its
injected faults).  The campaign stops cleanly when the next run (before a run) or the next
shot (after a shot) would leave less than its reserve, so the supervisor's own low-disk trip
(a latched fault, at the rig's smaller `min_disk_free_mb`) is the last line, not the usual one.

Devices: a probe asks each driver something harmless (supply readback, board sensors,
transmitter silent); a driver that has vanished raises, which is how the campaign learns that
a device dropped out without energising anything.
"""

from __future__ import annotations

from typing import Any

from controller.errors import DriverError
from controller.rig import Rig
from controller.sequences.timeline import ShotPlan, Timeline

BYTES_PER_SAMPLE = 4  # float32
CHANNELS_ASSUMED = 4  # more than any transceiver records: the estimate errs on the safe side
STORE_OVERHEAD = 1.25  # status rows, indexes, WAL frames (common practice, no source)


def shot_mb(shot: ShotPlan) -> float:
    """Upper estimate of the store growth for one shot: samples x channels x 4 B x overhead."""
    return shot.segment_samples * CHANNELS_ASSUMED * BYTES_PER_SAMPLE * STORE_OVERHEAD / 1e6


def run_mb(timeline: Timeline) -> float:
    return sum(shot_mb(s) for s in timeline.shots)


def disk_free_mb(rig: Rig, store: Any) -> float | None:
    """Free space beside the store from the rig's host monitor (None if it cannot tell)."""
    from controller.supervisor.host import LocalHost

    host = rig.host if rig.host is not None else LocalHost()
    try:
        return host.readings(store).get("disk_free_mb")
    except OSError:
        return None


def reserve_shortfall(free_mb: float | None, need_mb: float, reserve_mb: float, what: str) -> str | None:
    """None if `what` (needing need_mb) fits above the reserve; else the one-line reason to stop."""
    if free_mb is None or free_mb - need_mb >= reserve_mb:
        return None
    return (f"{free_mb:.1f} MB free beside the store; {what} needs about {need_mb:.1f} MB and the campaign keeps "
            f"{reserve_mb:g} MB in reserve (campaign.disk_reserve_mb)")


def probe(rig: Rig) -> None:
    """Ask every device something harmless; raise DriverError naming the first that does not answer."""
    steps = [("supply", rig.supply.read_current), ("supply", rig.supply.read_voltage),
             ("transceiver", rig.transceiver.silence)]
    if rig.board is not None:
        steps.append(("board", rig.board.read_sensors))
    for role, ask in steps:
        try:
            ask()
        except DriverError:
            raise
        except Exception as exc:  # noqa: BLE001 - a vanished transport raises all sorts (OSError, timeouts)
            raise DriverError(f"{role}: {type(exc).__name__}: {exc}") from None


def make_safe_and_probe(rig: Rig) -> None:
    """Safe state on every device (all steps tried), then the probe; raise DriverError if any part failed."""
    failures = rig.make_safe()
    if failures:
        raise DriverError("making safe failed for: " + "; ".join(failures))
    probe(rig)


def close_rig(rig: Rig | None) -> None:
    """Make safe and release ports (drivers that hold any have close()); never raises."""
    if rig is None:
        return
    close = getattr(rig, "close", None)
    try:
        if close is not None:
            close()
        else:
            rig.make_safe()
    except Exception:  # noqa: BLE001 - a vanished device cannot be closed either
        pass
