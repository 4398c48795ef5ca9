"""The `[campaign]` table of a schedule file: how `precess campaign` behaves when nobody is there.

    [campaign]
    disk_reserve_mb = 500.0      # stop cleanly before free space beside the store falls below this
    device_wait_s = 3600.0       # a device that dropped out: wait this long for it, then stop
    retry_every_s = 30.0         # how often to try to reconnect (campaign clock)
    ack_wait_s = 0.0             # a latched trip: wait this long for `precess ack`; 0 = stop at once
    heartbeat_every_s = 10.0     # the heartbeat file is rewritten at least this often (wall clock)
    log_max_kb = 5000            # the campaign log rotates at this size ...
    log_backups = 5              # ... keeping this many old logs

Every key is optional; a schedule without the table gets these defaults.
"""

from __future__ import annotations

from dataclasses import dataclass

from controller.config.strict import field


@dataclass(frozen=True, kw_only=True)
class CampaignConfig:
    disk_reserve_mb: float = field(500.0, min=0.0, help="free space kept beside the store; the campaign stops "
                                                        "before going below it (at least the rig's "
                                                        "supervisor.min_disk_free_mb)")
    device_wait_s: float = field(3600.0, min=0.0, max=30 * 86400.0,
                                 help="how long to wait for a device that dropped out before stopping")
    retry_every_s: float = field(30.0, gt=0.0, max=3600.0, help="time between reconnection attempts")
    ack_wait_s: float = field(0.0, min=0.0, max=30 * 86400.0,
                              help="how long to wait for an operator to acknowledge a trip; 0 = stop at once")
    heartbeat_every_s: float = field(10.0, gt=0.0, max=3600.0, help="wall-clock seconds between heartbeat writes")
    log_max_kb: int = field(5000, min=1, max=10_000_000, help="size at which the campaign log rotates")
    log_backups: int = field(5, min=1, max=1000, help="rotated logs kept")
