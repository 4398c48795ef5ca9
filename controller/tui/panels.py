"""Text of the TUI's panels, as pure functions of the LiveState (no Textual here).

Every state that matters is spelled out in words (RUN, IDLE, TRIPPED, LATE...) and, where it
calls for attention, also set in inverted text, so nothing depends on colour.
"""

from __future__ import annotations

import math
import textwrap
import time

from rich.style import Style
from rich.text import Text

from controller.tui.adapter import FitSummary
from controller.tui.latch import STATE_TRIPPED
from controller.tui.state import LiveState

ALARM = Style(reverse=True, bold=True)
CALM = Style()
QUIET = Style(dim=True)
HEARTBEAT_LATE_S = 2.0
EIGHTHS = " ▏▎▍▌▋▊▉█"


def utc_hms(epoch_s: float | None) -> str:
    return time.strftime("%H:%M:%S", time.gmtime(epoch_s)) + "Z" if epoch_s is not None else "--:--:--Z"


def format_pm(value: float, sd: float, unit: str = "") -> str:
    """value ± sd with the sd to two significant digits and value to the same decimal place."""
    if not math.isfinite(value):
        return "—"
    unit = f" {unit}" if unit else ""
    if not (math.isfinite(sd) and sd > 0):
        return f"{value:.4g}{unit}"
    decimals = min(6, max(0, 1 - math.floor(math.log10(sd))))
    return f"{value:.{decimals}f} ± {sd:.{decimals}f}{unit}"


def bar(fraction: float, width: int) -> str:
    """A progress bar of `width` cells with eighth-cell resolution, between ▕ and ▏."""
    fraction = min(1.0, max(0.0, fraction))
    eighths = int(round(fraction * width * 8))
    full, part = divmod(eighths, 8)
    inner = "█" * full + (EIGHTHS[part] if part else "")
    return "▕" + inner.ljust(width) + "▏"


RUN_WORDS = {"completed": "DONE", "stopped": "STOPPED", "interlock": "INTERLOCK", "failed": "FAILED"}


def run_word(state: LiveState) -> tuple[str, Style]:
    run = state.run
    if run is None:
        return "IDLE", CALM
    if not run.exit_status:
        return "RUN", Style(bold=True)
    word = RUN_WORDS.get(run.exit_status, run.exit_status.upper())
    return word, ALARM if run.exit_status in ("failed", "interlock") else CALM


def status_line(state: LiveState, width: int) -> Text:
    """The top line: rig, run state and progress, then (never cut) supervisor and rig clock."""
    left = Text(" ")
    left.append(state.rig_name, Style(bold=True))
    if state.simulated:
        left.append(" SIM", QUIET)
    left.append(" │ ")
    word, style = run_word(state)
    left.append(word, style)
    if state.run is not None:
        left.append(f" {state.run.shots_done}/{state.run.shots_planned} {state.run.label}")
    right = Text(" │ ")
    if state.latch_state == STATE_TRIPPED:
        right.append(" TRIPPED · a: ack ", ALARM)
    else:
        right.append("supervisor armed")
    right.append(" " + utc_hms(state.clock_s) + " ", QUIET)
    left.truncate(max(0, width - len(right)), overflow="ellipsis", pad=True)
    return left + right


def headline_lines(kind: str, headline: dict, width: int) -> list[Text]:
    """A kind's headline (controller.analysis.by_kind): the quantity with its sd, then the details."""
    lines = [Text(f"{kind} run, shots so far", QUIET),
             Text(f"{headline['quantity']} {format_pm(headline['value'], headline['sd'] or math.nan, headline['unit'])}",
                  Style(bold=True))]
    return lines + [Text(line) for line in textwrap.wrap(str(headline.get("text", "")), max(10, width))]


def fit_lines(fit: FitSummary | None, note: str, kind: str = "fid", headline: dict | None = None,
              width: int = 30) -> list[Text]:
    if headline is not None:
        return headline_lines(kind, headline, width)
    if fit is None:
        return [Text(note or "no fit yet: waiting for shots", QUIET)]
    return [
        Text(f"stack of {fit.shots} shot{'s' if fit.shots != 1 else ''}", QUIET),
        Text(f"f   {format_pm(fit.frequency_hz, fit.frequency_sd_hz, 'Hz')}"),
        Text(f"B   {format_pm(fit.field_nt, fit.field_sd_nt, 'nT')}", Style(bold=True)),
        Text(f"T2* {format_pm(fit.t2star_s, fit.t2star_sd_s, 's')}"),
        Text(f"SNR {format_pm(fit.snr, fit.snr_sd)}"),
    ]


def heartbeat(state: LiveState, wall_s: float) -> Text:
    if not state.active:
        return Text("beat  idle", QUIET)
    if state.last_record_wall_s is None:
        return Text("beat  waiting for the engine")
    age = max(0.0, wall_s - state.last_record_wall_s)
    if age > HEARTBEAT_LATE_S:
        return Text(f"beat  LATE {age:.1f} s: driver busy?", ALARM)
    return Text(f"beat  {age:.1f} s ago")


def _c(value: float | None) -> str:
    return f"{value:5.1f}" if value is not None else "  n/a"


def rig_lines(state: LiveState, wall_s: float) -> list[Text]:
    """Coil current and voltage; coil temperature measured (thermistor, resistance) and from the
    supervisor's model (now, and at the end of the present pulse); battery; heartbeat; supervisor."""
    r = state.readings
    current = r.get("current_a", 0.0)
    lines = [Text(f"coil  {current:5.2f} A  {r.get('voltage_v', 0.0):5.1f} V",
                  Style(bold=True) if current > 0.05 else CALM)]
    lines.append(Text(f"temp  {_c(r.get('coil_temperature_c'))} °C  R {_c(r.get('resistance_temperature_c'))}"))
    lines.append(Text(f"model {_c(r.get('model_temperature_c'))} °C  end {_c(r.get('predicted_temperature_c'))}"))
    if "battery_v" in r:
        lines.append(Text(f"batt  {r['battery_v']:5.1f} V"))
    lines.append(heartbeat(state, wall_s))
    if state.latch_state == STATE_TRIPPED:
        lines.append(Text("TRIPPED: " + state.trip_reason, ALARM))
    else:
        duty = r.get("duty_cycle")
        lines.append(Text("supervisor armed" + (f" · duty {100 * duty:.0f} %" if duty is not None else "")))
    return lines


def queue_lines(state: LiveState) -> tuple[list[Text], list[Text]]:
    """(progress and queue lines, log lines newest last)."""
    lines: list[Text] = []
    run = state.run
    if run is not None:
        elapsed = max(0.0, run.latest_at_s - run.started_at_s)
        total = run.planned_duration_s or 0.0
        fraction = elapsed / total if total > 0 else run.shots_done / max(1, run.shots_planned)
        if run.exit_status == "completed":
            fraction = 1.0
        lines.append(Text(f"{bar(fraction, 14)} {run.shots_done}/{run.shots_planned} shots"))
        lines.append(Text(f"{elapsed:6.1f} / {total:.1f} s rig time", QUIET))
    for i, label in enumerate(state.queue):
        lines.append(Text(("next " if i == 0 else "     ") + label))
    if not state.queue:
        lines.append(Text("queue empty", QUIET))
    log = [Text(text, ALARM if alarm else QUIET) for text, alarm in state.log]
    return lines, log
