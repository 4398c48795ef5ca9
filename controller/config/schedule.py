"""Schedule files: which sequence to run, how often, how many times or until when, within which hours.

    name = "kestrel-flats-night-watch"
    sequence = "../sequences/fid-sudden.toml"   # relative to this file
    every_s = 600.0                             # one run every 10 minutes
    count = 36                                  # at most this many runs (optional)
    until = "2031-06-02T06:00:00Z"              # no run starts after this (optional)
    start = "2031-06-01T18:00:00Z"              # first slot (optional; else slots are
                                                # whole multiples of every_s since 1970, UTC)
    windows = ["18:00-06:00"]                   # daily windows, local to `timezone` (optional)
    timezone = "UTC"
    follow_larmor = true                        # pulses follow the last measured frequency
    on_failure = "stop"                         # or "continue" with the next slot
    [campaign]                                  # only `precess campaign` reads it (optional;
    disk_reserve_mb = 500.0                     #  see controller/config/campaign.py)

A run starts on a slot: start + k every_s.  A slot outside every window, or already past
when the previous run ends, is skipped.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from controller.config.campaign import CampaignConfig
from controller.config.loader import read_toml
from controller.config.strict import build, field
from controller.errors import ConfigError

WINDOW_PATTERN = re.compile(r"^(\d{2}):(\d{2})-(\d{2}):(\d{2})$")


@dataclass(frozen=True, kw_only=True)
class ScheduleConfig:
    name: str = field(help="schedule name")
    sequence: str = field(help="sequence file, relative to the schedule file")
    every_s: float = field(gt=0.0, max=31 * 86400.0, help="time between slots")
    count: int | None = field(None, min=1, max=10_000_000, help="most runs")
    until: str | None = field(None, help="ISO 8601 time after which no run starts, e.g. 2031-06-02T06:00:00Z")
    start: str | None = field(None, help="ISO 8601 time of the first slot")
    windows: tuple[str, ...] = field((), help='daily windows "HH:MM-HH:MM" in `timezone`')
    timezone: str = field("UTC", help="IANA time zone of the windows, e.g. UTC or Europe/Vienna")
    follow_larmor: bool = field(True, help="pulses follow the last measured Larmor frequency")
    on_failure: str = field("stop", choices=("stop", "continue"))
    description: str = field("")
    campaign: CampaignConfig = field(default_factory=CampaignConfig)


@dataclass(frozen=True)
class Schedule:
    """A schedule with its times resolved: seconds since the epoch (UTC) and minutes of the day."""

    config: ScheduleConfig
    path: str
    sequence_path: str
    anchor_s: float
    until_s: float | None
    windows_min: tuple[tuple[int, int], ...]
    zone: ZoneInfo


def parse_time_s(text: str, file: str, key: str) -> float:
    """ISO 8601 date-time to seconds since the epoch; a time without an offset is UTC."""
    try:
        moment = datetime.fromisoformat(text)
    except ValueError:
        raise ConfigError(file, key, f"{text!r} is not an ISO 8601 time; allowed: e.g. 2031-06-01T18:00:00Z") from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=timezone.utc)
    return moment.timestamp()


def parse_window(text: str, file: str, key: str) -> tuple[int, int]:
    """'HH:MM-HH:MM' to (start minute, end minute) of the day; the end may be past midnight (22:00-04:00)."""
    match = WINDOW_PATTERN.match(text.strip())
    if not match:
        raise ConfigError(file, key, f"{text!r} is not a daily window; allowed: \"HH:MM-HH:MM\" such as \"18:00-06:00\"")
    h1, m1, h2, m2 = (int(g) for g in match.groups())
    if h1 > 24 or h2 > 24 or m1 > 59 or m2 > 59 or (h1 == 24 and m1) or (h2 == 24 and m2):
        raise ConfigError(file, key, f"{text!r} holds a time that is not on a clock; allowed: 00:00 to 24:00")
    return h1 * 60 + m1, h2 * 60 + m2


def load_schedule(path: str | Path) -> Schedule:
    """Read and resolve a schedule file; errors name the file and key."""
    file = str(path)
    cfg = build(ScheduleConfig, read_toml(path), file)
    try:
        zone = ZoneInfo(cfg.timezone)
    except (ZoneInfoNotFoundError, ValueError):
        raise ConfigError(file, "timezone", f"{cfg.timezone!r} is not a known time zone; allowed: an IANA name "
                                            "such as UTC or Europe/Vienna") from None
    windows = tuple(parse_window(w, file, f"windows[{i}]") for i, w in enumerate(cfg.windows))
    anchor = parse_time_s(cfg.start, file, "start") if cfg.start else 0.0
    until = parse_time_s(cfg.until, file, "until") if cfg.until else None
    if until is not None and cfg.start and until < anchor:
        raise ConfigError(file, "until", f"{cfg.until} is before start {cfg.start}; allowed: a later time")
    sequence_path = str(Path(path).parent / cfg.sequence)
    if not Path(sequence_path).exists():
        raise ConfigError(file, "sequence", f"{sequence_path} not found")
    return Schedule(config=cfg, path=file, sequence_path=sequence_path, anchor_s=anchor, until_s=until,
                    windows_min=windows, zone=zone)
