"""Picking a campaign up where it was: its runs, sessions and gaps, read from and written to the store.

A campaign is identified by its schedule's name and its rig's name.  Its runs are the runs
whose configuration snapshot names both (every scheduled run's snapshot carries its
schedule, occurrence and slot), so the schedule's position is rebuilt from the store itself:
runs done, the last slot used, failures, and the Larmor frequency the pulses follow.

Each start and end of the campaign process (and every device drop-out, return and trip
wait) is a `campaign` row in the store's `maintenance` table.  A session whose last row is
not an `end` was killed (SIGKILL, power cut).  On the next start:

* a run left without an end record is closed (status failed, reason "interrupted ...");
  its committed shots stay, whole, each in its own transaction; the shot in flight is lost;
* the time the campaign was not running is recorded as a gap (Store.record_gap): from the
  last sign of life (latest of: the last committed shot's end, the last run's end, the last
  campaign row, the heartbeat) to the moment it resumed;
* the killed run's slot counts as used, so no slot is run twice.
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass
from typing import Any

from controller.campaign.heartbeat import Beat
from controller.records import EXIT_COMPLETED, EXIT_FAILED
from controller.schedule.execute import ScheduleState
from controller.store import Store

ACTION = "campaign"
END = "end"
KILLED_REASON = "interrupted: the campaign process ended without a clean stop (killed or power cut)"


@dataclass(frozen=True)
class CampaignKey:
    schedule: str
    rig: str


@dataclass(frozen=True)
class CampaignRun:
    run_id: str
    started_at_s: float
    finished_at_s: float | None
    exit_status: str | None
    occurrence: int | None
    slot_s: float | None


@dataclass(frozen=True)
class Recovery:
    """What a start found and did about the previous session."""

    previous_event: str | None  # the last campaign row's event, None for a first start
    closed_runs: tuple[str, ...]
    gap: tuple[float, float, str] | None  # (start_s, end_s, reason) recorded, if any


def _utc(t: float) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%SZ", time.gmtime(t))


CAMPAIGN_RUNS_SQL = (
    "SELECT run_id, started_at_s, finished_at_s, exit_status, json_extract(config_json, '$.schedule.occurrence'), "
    "json_extract(config_json, '$.schedule.slot_s') FROM runs r "
    "WHERE json_extract(config_json, '$.schedule.name') = ?1 AND json_extract(config_json, '$.rig.name') = ?2")


def campaign_runs(store: Store, key: CampaignKey, extra_condition: str = "") -> list[CampaignRun]:
    """The campaign's runs (optionally only those meeting an SQL condition on runs r), oldest first."""
    cur = store.db.execute(f"{CAMPAIGN_RUNS_SQL} {extra_condition} ORDER BY started_at_s", (key.schedule, key.rig))
    return [CampaignRun(*row) for row in cur.fetchall()]


def restored_state(store: Store, key: CampaignKey) -> ScheduleState:
    """The schedule's position from its stored runs: runs done, last slot, failures, the frequency followed."""
    runs = campaign_runs(store, key)
    state = ScheduleState(runs_done=len(runs), failures=sum(r.exit_status == EXIT_FAILED for r in runs),
                          run_ids=[r.run_id for r in runs])
    slots = [r.slot_s for r in runs if r.slot_s is not None]
    state.last_slot_s = max(slots) if slots else None
    for run in reversed(runs):
        if run.exit_status != EXIT_COMPLETED:
            continue
        frequencies = [r["frequency_hz"] for r in store.results(run.run_id) if r.get("frequency_hz") is not None]
        if frequencies:
            state.larmor_hz = float(frequencies[-1])
            state.larmor_source = f"run {run.run_id} of schedule {key.schedule!r}"
            break
    return state


def record_event(store: Store, at_s: float, key: CampaignKey, event: str, session: str, **detail: Any) -> None:
    """One campaign row in the maintenance table (raises StoreError if the store cannot take it)."""
    store.record_maintenance(at_s, ACTION, {"event": event, "schedule": key.schedule, "rig": key.rig,
                                            "session": session, **detail})


def campaign_events(store: Store, key: CampaignKey) -> list[tuple[float, dict[str, Any]]]:
    """(at_s, detail) of every campaign row of this campaign, in the order written."""
    cur = store.db.execute(
        "SELECT at_s, detail_json FROM maintenance WHERE action = ? AND json_extract(detail_json, '$.schedule') = ? "
        "AND json_extract(detail_json, '$.rig') = ? ORDER BY rowid", (ACTION, key.schedule, key.rig))
    return [(at_s, json.loads(detail)) for at_s, detail in cur.fetchall()]


def last_sign_of_life_s(store: Store, key: CampaignKey, beat: Beat | None) -> float | None:
    """The latest moment the campaign is known to have been running (see the module docstring)."""
    times: list[float] = []
    latest = campaign_runs(store, key, "AND r.started_at_s = (SELECT MAX(started_at_s) FROM runs q WHERE "
                                       "json_extract(q.config_json, '$.schedule.name') = ?1 AND "
                                       "json_extract(q.config_json, '$.rig.name') = ?2)")
    if latest:  # runs follow one another: the latest holds the latest shot and end
        run = latest[-1]
        shot_end = store.db.execute("SELECT MAX(started_at_s + n_samples / sample_rate_hz) FROM shots "
                                    "WHERE run_id = ?", (run.run_id,)).fetchone()[0]
        times += [t for t in (shot_end, run.finished_at_s, run.started_at_s) if t is not None]
    events = campaign_events(store, key)
    if events:
        times.append(events[-1][0])
    if beat is not None and beat.schedule == key.schedule and beat.rig == key.rig:
        times.append(beat.time_s)
    return max(times) if times else None


def recover(store: Store, key: CampaignKey, now_s: float, beat: Beat | None) -> Recovery:
    """Close what a killed session left open and record the time the campaign was not running."""
    events = campaign_events(store, key)
    previous = events[-1][1] if events else None
    alive_s = last_sign_of_life_s(store, key, beat)
    campaign_ids = {r.run_id for r in campaign_runs(store, key)}
    unfinished = [r for r in store.unfinished_runs() if r in campaign_ids]
    killed = previous is not None and previous.get("event") != END
    closed = []
    for run_id in unfinished:
        kept = store.last_shot(run_id)
        detail = f"{kept[0] + 1} shot(s) kept" if kept else "no shot stored"
        store.close_unfinished_run(run_id, f"{KILLED_REASON}; {detail}")
        closed.append(run_id)
    gap = None
    if alive_s is not None and now_s > alive_s:
        if killed or unfinished:
            reason = (f"campaign not running: the process ended without a clean stop (killed or power cut) after "
                      f"{_utc(alive_s)}; resumed at {_utc(now_s)}")
        elif previous is not None and previous.get("status") != EXIT_COMPLETED:
            reason = (f"campaign stopped ({previous.get('status')}: {previous.get('reason', '')}) until restarted "
                      f"at {_utc(now_s)}")
        else:
            reason = ""
        if reason:
            gap = (alive_s, now_s, reason)
            store.record_gap(unfinished[-1] if unfinished else None, alive_s, now_s, reason)
    return Recovery(previous.get("event") if previous else None, tuple(closed), gap)


def runs_without_result(store: Store, key: CampaignKey) -> list[CampaignRun]:
    """Campaign runs that have shots but no stored result (killed before or during their analysis)."""
    return campaign_runs(store, key, "AND EXISTS (SELECT 1 FROM shots s WHERE s.run_id = r.run_id AND "
                                     "s.samples IS NOT NULL) AND NOT EXISTS (SELECT 1 FROM results x "
                                     "WHERE x.run_id = r.run_id)")


def resume_clock_start_s(alive_s: float | None, beat: Beat | None, wall_now_s: float, requested_s: float) -> float:
    """Where a simulated campaign's virtual clock starts: never before its last sign of life.

    The virtual clock may run far ahead of the wall clock; after a kill it continues from the
    last sign of life plus the wall-clock time the process was down (the downtime passes at
    the real rate), or from requested_s (--sim-start, else now) if that is later.
    """
    if alive_s is None:
        return requested_s
    down_s = max(0.0, wall_now_s - beat.written_wall_s) if beat is not None else 0.0
    return max(requested_s, alive_s + down_s)
