"""When the runs of a schedule start: pure functions of the schedule and a time.

Slots lie on the grid anchor + k every_s (k >= 0).  next_slot_s(schedule, after_s) is the
first slot at or after after_s that lies inside a daily window (if any are set) and not past
`until`.  Nothing here reads a clock, so a restarted scheduler finds the same slots.
"""

from __future__ import annotations

import math
from datetime import datetime, time, timedelta

from controller.config.schedule import Schedule

MAX_WINDOW_JUMPS = 800  # a little over two years of daily windows


def minute_of_day(t_s: float, schedule: Schedule) -> float:
    local = datetime.fromtimestamp(t_s, schedule.zone)
    return local.hour * 60 + local.minute + local.second / 60 + local.microsecond / 6e7


def in_windows(t_s: float, schedule: Schedule) -> bool:
    """True without windows; else when the local time of day lies in [start, end) of one of them
    (a window whose end is before its start runs over midnight; equal ends mean all day)."""
    if not schedule.windows_min:
        return True
    m = minute_of_day(t_s, schedule)
    for start, end in schedule.windows_min:
        if start == end or (start < end and start <= m < end) or (start > end and (m >= start or m < end)):
            return True
    return False


def next_window_open_s(t_s: float, schedule: Schedule) -> float:
    """The first window opening strictly after t_s (local clock, time-zone aware)."""
    local = datetime.fromtimestamp(t_s, schedule.zone)
    candidates = []
    for day in (0, 1, 2):
        date = (local + timedelta(days=day)).date()
        for start, _ in schedule.windows_min:
            hour, minute = divmod(start, 60)
            moment = (datetime.combine(date, time(0, 0), schedule.zone) + timedelta(days=hour // 24)).replace(
                hour=hour % 24, minute=minute)
            if moment.timestamp() > t_s:
                candidates.append(moment.timestamp())
    return min(candidates)


GRID_TOLERANCE_S = 1e-6


def _grid_slot(t_s: float, schedule: Schedule, strictly_after: bool = False) -> float:
    """The grid time at or after t_s (strictly after, if asked); within a microsecond of a slot is on it."""
    every = schedule.config.every_s
    x = (t_s - schedule.anchor_s) / every
    if abs(x - round(x)) * every < GRID_TOLERANCE_S:
        x = float(round(x))
    k = math.floor(x) + 1 if strictly_after else math.ceil(x)
    return schedule.anchor_s + max(0, k) * every


def next_slot_s(schedule: Schedule, after_s: float, strictly_after: bool = False) -> float | None:
    """The first run slot at (or strictly after) after_s, or None once `until` has passed."""
    t = _grid_slot(after_s, schedule, strictly_after)
    for _ in range(MAX_WINDOW_JUMPS):
        if schedule.until_s is not None and t > schedule.until_s:
            return None
        if in_windows(t, schedule):
            return t
        t = _grid_slot(next_window_open_s(t, schedule), schedule)
    raise ValueError(f"{schedule.path}: no slot of every {schedule.config.every_s:g} s falls inside the windows")


def upcoming_slots(schedule: Schedule, after_s: float, count: int) -> list[float]:
    """Up to `count` slots from after_s on (for showing a plan)."""
    slots: list[float] = []
    t = after_s
    limit = schedule.config.count
    while len(slots) < count and (limit is None or len(slots) < limit):
        slot = next_slot_s(schedule, t, strictly_after=bool(slots))
        if slot is None:
            break
        slots.append(slot)
        t = slot
    return slots
