"""The TUI's screens: watch (live views), plan (sequences, parameters, checks, queue), and the
dialogs (edit a value, acknowledge a trip, confirm quitting, help)."""

from __future__ import annotations

from pathlib import Path

from rich.style import Style
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen, Screen
from textual.widgets import DataTable, Input, OptionList, Static
from textual.widgets.option_list import Option

from controller.cli.common import real_rig_caution
from controller.sequences.timeline import Polarise
from controller.tui.form import FormRow, with_text
from controller.tui.keys import HELP_TEXT, PLAN_KEYS, WATCH_KEYS
from controller.tui.panels import ALARM
from controller.tui.plan import PlanCheck, SequenceFile, check_rows, form_of, queued_run
from controller.tui.widgets import (
    PANE_HISTORY, PANE_SPECTRUM, PANE_TRACE, FitPanel, KeyBar, LiveWidget, PlotPane, QueuePanel, RigPanel, StatusBar,
)


PARAMETER_COLUMNS = (("parameter", 19), ("value", 12), ("allowed", 17))


class LiveScreen(Screen):
    """A screen whose live widgets redraw when it comes back to the top."""

    def on_screen_resume(self) -> None:
        for widget in self.query(LiveWidget):
            widget.refresh()


class WatchScreen(LiveScreen):
    """Live views of the run: plots on the left, fit, rig and queue on the right."""

    BINDINGS = [Binding("v", "toggle_source", "shot/stack"), Binding("h", "toggle_lower", "spectrum/history")]

    def compose(self) -> ComposeResult:
        yield StatusBar(id="status")
        with Horizontal(id="body"):
            with Vertical(id="plots"):
                yield PlotPane(PANE_TRACE, id="upper")
                yield PlotPane(PANE_SPECTRUM, id="lower")
            with Vertical(id="side"):
                yield FitPanel(id="fit")
                yield RigPanel(id="rig")
                yield QueuePanel(id="queue")
        yield KeyBar(WATCH_KEYS, id="keys")

    def on_mount(self) -> None:
        self.query_one("#fit").border_title = "fit"
        self.query_one("#rig").border_title = "rig"
        self.query_one("#queue").border_title = "run · queue · log"

    def action_toggle_source(self) -> None:
        upper, lower = self.query_one("#upper", PlotPane), self.query_one("#lower", PlotPane)
        source = "stack" if upper.source == "shot" else "shot"
        upper.set_view(upper.kind, source)
        lower.set_view(lower.kind, source)

    def action_toggle_lower(self) -> None:
        lower = self.query_one("#lower", PlotPane)
        lower.set_view(PANE_HISTORY if lower.kind == PANE_SPECTRUM else PANE_SPECTRUM, lower.source)


class PlanScreen(LiveScreen):
    """Pick a sequence file, edit its parameters, see the checks, queue it."""

    BINDINGS = [
        Binding("plus,equals_sign", "enqueue", "queue it"),
        Binding("minus", "unqueue", "unqueue last"),
        Binding("r", "revert", "revert edits"),
        Binding("escape", "app.watch", "watch"),
    ]

    def __init__(self, sequences: list[SequenceFile]) -> None:
        super().__init__()
        self.sequences = sequences
        self.edited: dict[Path, list[FormRow]] = {}
        self.current: SequenceFile | None = None
        self.check: PlanCheck | None = None

    def compose(self) -> ComposeResult:
        yield StatusBar(id="status")
        with Horizontal(id="body"):
            with Vertical(id="choose"):
                yield OptionList(*[Option(s.label if not s.error else f"✗ {s.label}", id=str(i))
                                   for i, s in enumerate(self.sequences)], id="files")
                yield QueuePanel(id="queue")
            with Vertical(id="edit"):
                yield DataTable(id="params", cursor_type="row", zebra_stripes=False)
                yield Static(id="verdict")
        yield KeyBar(PLAN_KEYS, id="keys")

    def on_mount(self) -> None:
        self.query_one("#files").border_title = "sequences"
        self.query_one("#queue").border_title = "queue"
        table = self.query_one("#params", DataTable)
        table.border_title = "parameters · enter: edit"
        for label, width in PARAMETER_COLUMNS:
            table.add_column(label, width=width)
        self.query_one("#verdict").border_title = "checks"
        if self.sequences:
            self.load(0)
        else:
            self.show_verdict(Text("no sequence files found (give --sequences DIR)", ALARM))

    def on_option_list_option_highlighted(self, event: OptionList.OptionHighlighted) -> None:
        self.load(int(event.option.id))

    def load(self, index: int) -> None:
        self.current = self.sequences[index]
        if self.current.spec is None:
            self.fill_table([])
            self.check = None
            self.show_verdict(Text("cannot be used: " + self.current.error, ALARM))
            return
        rows = self.edited.setdefault(self.current.path, form_of(self.current))
        self.fill_table(rows)
        self.recheck()

    def rows(self) -> list[FormRow]:
        return self.edited.get(self.current.path, []) if self.current else []

    def fill_table(self, rows: list[FormRow]) -> None:
        table = self.query_one("#params", DataTable)
        row_index = table.cursor_row
        table.clear()
        for r in rows:
            value = r.text if r.text else "·"
            table.add_row(r.key, value + (" (fixed)" if r.read_only else ""), r.allowed, key=r.key)
        if rows:
            table.move_cursor(row=min(row_index, len(rows) - 1))

    def recheck(self) -> None:
        if self.current is None or self.current.spec is None:
            return
        self.check = check_rows(type(self.current.spec), self.rows(), self.app.loaded,  # type: ignore[attr-defined]
                                self.current.path)
        self.show_verdict(verdict_text(self.check, self.app.loaded.config, self.app.rig.simulated))  # type: ignore

    def show_verdict(self, text: Text) -> None:
        self.query_one("#verdict", Static).update(text)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        row = next((r for r in self.rows() if r.key == event.row_key.value), None)
        if row is None:
            return
        if row.read_only:
            self.notify(f"{row.key} is fixed by the file; choose another sequence to change it")
            return

        def done(text: str | None) -> None:
            if text is not None and self.current is not None:
                self.edited[self.current.path] = with_text(self.rows(), row.key, text)
                self.fill_table(self.rows())
                self.recheck()

        self.app.push_screen(EditValueScreen(row), done)

    def action_revert(self) -> None:
        if self.current is not None and self.current.spec is not None:
            self.edited[self.current.path] = form_of(self.current)
            self.fill_table(self.rows())
            self.recheck()

    def action_enqueue(self) -> None:
        if self.check is None or not self.check.ready or self.current is None:
            reason = self.check.error or str(self.check.violations[0]) if self.check else "no sequence chosen"
            self.notify(f"not queued: {reason}", severity="error")
            return
        self.app.session.enqueue(queued_run(self.check, self.app.loaded, self.current.path))  # type: ignore

    def action_unqueue(self) -> None:
        queued = self.app.session.queued()  # type: ignore[attr-defined]
        if queued:
            self.app.session.remove(len(queued) - 1)  # type: ignore[attr-defined]


def verdict_text(check: PlanCheck, rig_config, simulated: bool) -> Text:
    """READY / REFUSED / INVALID with the reasons, a caution for a real coil, the timeline in words."""
    text = Text()
    if check.error:
        text.append("INVALID", ALARM)
        text.append(f" {check.error}\n")
        return text
    if check.violations:
        text.append("REFUSED", ALARM)
        text.append(f" {len(check.violations)} limit(s) exceeded:\n")
        for v in check.violations:
            text.append(f"· {v}\n")
    else:
        text.append("READY", Style(bold=True, reverse=True))
        text.append(f" {len(check.timeline.shots)} shots, {check.timeline.duration_s:.1f} s;"
                    f" coil peak {check.peak_temperature_c:.1f} °C (limit {rig_config.limits.max_coil_temperature_c:g})"
                    " · +: queue it\n")
        if not simulated:
            current = max((e.current_a for s in check.timeline.shots for e in s.of_kind(Polarise)), default=0.0)
            text.append(real_rig_caution(rig_config, current).splitlines()[0] + "\n", ALARM)
    text.append("\n".join(check.description), Style(dim=True))
    return text


class EditValueScreen(ModalScreen[str | None]):
    """Edit one parameter: Enter keeps the text, Escape leaves it unchanged."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, row: FormRow) -> None:
        super().__init__()
        self.row = row

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Static(Text(self.row.key, Style(bold=True)))
            about = f"{self.row.type_name}" + (f", {self.row.allowed}" if self.row.allowed else "")
            yield Static(about + (f" · {self.row.help}" if self.row.help else ""))
            yield Input(self.row.text, id="value")
            yield Static("enter: keep · esc: cancel · empty: not given", classes="hint")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        self.dismiss(event.value)

    def action_cancel(self) -> None:
        self.dismiss(None)


class AckScreen(ModalScreen[str | None]):
    """Acknowledge a trip: the operator types the rig's name and presses enter."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, reason: str, confirmation: str) -> None:
        super().__init__()
        self.reason = reason
        self.confirmation = confirmation

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Static(Text(" SUPERVISOR TRIPPED ", ALARM))
            yield Static(self.reason)
            yield Static("Find and fix the cause first. Nothing is energised until you acknowledge.")
            yield Static(Text.assemble("Type the rig's name ", (self.confirmation, Style(bold=True)),
                                       " and press enter · esc: cancel"))
            yield Input(placeholder="rig name", id="word")
            yield Static("", id="ack-error")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.value.strip() == self.confirmation:
            self.dismiss(event.value.strip())
        else:
            self.query_one("#ack-error", Static).update(
                Text("does not match the rig's name; the trip stays latched", ALARM))
            event.input.value = ""

    def action_cancel(self) -> None:
        self.dismiss(None)


class ConfirmQuitScreen(ModalScreen[bool]):
    BINDINGS = [Binding("y", "answer(True)", "quit"), Binding("n,escape", "answer(False)", "stay")]

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Static(Text(" A run is active ", ALARM))
            yield Static("Quitting stops it; the engine makes the rig safe before the program ends.")
            yield Static("y: stop and quit · n / esc: stay")

    def action_answer(self, answer: bool) -> None:
        self.dismiss(answer)


class HelpScreen(ModalScreen[None]):
    BINDINGS = [Binding("escape,question_mark,f1,q", "close", "close")]

    def compose(self) -> ComposeResult:
        with Vertical(id="help"):
            yield Static(HELP_TEXT)

    def on_mount(self) -> None:
        self.query_one("#help").border_title = "keys · esc: close"

    def action_close(self) -> None:
        self.dismiss(None)


__all__ = ["WatchScreen", "PlanScreen", "EditValueScreen", "AckScreen", "ConfirmQuitScreen", "HelpScreen",
           "LiveWidget"]
