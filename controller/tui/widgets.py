"""Textual widgets of the TUI: each draws a part of the app's LiveState when told it changed.

`LiveWidget.PARTS` names the state parts (see LiveState.apply) that make a widget redraw;
"tick" is the app's 10 Hz timer for clocks and the heartbeat.
"""

from __future__ import annotations

import time
from typing import TYPE_CHECKING

from rich.style import Style
from rich.text import Text
from textual.widget import Widget

from controller.tui import panels
from controller.tui.plot import render_plot
from controller.tui.views import history_sections, spectrum_spec, trace_spec

if TYPE_CHECKING:
    from controller.tui.state import LiveState

PANE_TRACE = "trace"
PANE_SPECTRUM = "spectrum"
PANE_HISTORY = "history"
MIN_SECTION_ROWS = 6  # a caption and a plot of at least 5 rows; fewer and the last sections are left out


class LiveWidget(Widget):
    """A widget drawn from the app's LiveState."""

    PARTS: frozenset[str] = frozenset()

    @property
    def state(self) -> LiveState:
        return self.app.state  # type: ignore[attr-defined]

    def state_changed(self, parts: set[str]) -> None:
        if parts & self.PARTS:
            self.refresh()

    def fit_lines(self, lines: list[Text]) -> Text:
        width = max(1, self.content_size.width)
        for line in lines:
            line.truncate(width, overflow="ellipsis")
        return Text("\n").join(lines)


class StatusBar(LiveWidget):
    PARTS = frozenset({"run", "latch", "status", "tick"})

    def render(self) -> Text:
        return panels.status_line(self.state, self.content_size.width)


class KeyBar(Widget):
    """One line of the keys that matter on this screen."""

    def __init__(self, keys: list[tuple[str, str]], **kwargs) -> None:
        super().__init__(**kwargs)
        self.keys = keys

    def render(self) -> Text:
        line = Text()
        for key, what in self.keys:
            line.append(f" {key}", Style(bold=True, reverse=key.startswith("^X")))
            line.append(f" {what} ")
        line.truncate(max(1, self.content_size.width), overflow="ellipsis")
        return line


class FitPanel(LiveWidget):
    PARTS = frozenset({"fit"})

    def render(self) -> Text:
        views = self.state.views
        kind, headline = (views.kind, views.headline) if views is not None else ("fid", None)
        return self.fit_lines(panels.fit_lines(self.state.fit, self.state.fit_note, kind, headline,
                                               self.content_size.width))


class RigPanel(LiveWidget):
    PARTS = frozenset({"status", "latch", "run", "tick"})

    def render(self) -> Text:
        return self.fit_lines(panels.rig_lines(self.state, time.monotonic()))


class QueuePanel(LiveWidget):
    PARTS = frozenset({"run", "queue", "log", "tick"})

    def render(self) -> Text:
        lines, log = panels.queue_lines(self.state)
        room = max(0, self.content_size.height - len(lines))
        return self.fit_lines(lines + (log[-room:] if room else []))


class PlotPane(LiveWidget):
    """A plot of the latest shot or the stack (trace or spectrum), or the run history."""

    PARTS = frozenset({"views", "history"})

    def __init__(self, kind: str, **kwargs) -> None:
        super().__init__(**kwargs)
        self.kind = kind
        self.source = "shot"  # or "stack"

    def set_view(self, kind: str, source: str) -> None:
        self.kind, self.source = kind, source
        self.border_title = self.title()
        self.refresh()

    def on_mount(self) -> None:
        self.border_title = self.title()

    def state_changed(self, parts: set[str]) -> None:
        if parts & self.PARTS:
            self.border_title = self.title()
            self.refresh()

    def title(self) -> str:
        views = self.state.views
        if self.kind == PANE_HISTORY:
            sections = history_sections(self.state.history, self.state.shot_fields)
            return f"history · {sections[0][0]}" if sections else "history"
        if views is None:
            return "last shot" if self.kind == PANE_TRACE else "spectrum"
        what = (f"shot {views.shot_index + 1}" if self.source == "shot"
                else f"stack of {views.shots_stacked}")
        if self.kind == PANE_TRACE:
            return f"{what} · signal & envelope (bold)"
        return f"{what} · spectrum · ┊ mains ▾ line"

    def render(self) -> Text:
        width, height = self.content_size.width, self.content_size.height
        state = self.state
        if self.kind == PANE_HISTORY:
            sections = history_sections(state.history, state.shot_fields)
            if not sections:
                return Text("no runs yet: each run adds its field and T2* here", Style(dim=True))
            return Text("\n").join(render_sections(sections, width, height))
        views = state.views
        if views is None:
            return Text("waiting for the first shot · p: plan a run · g: go", Style(dim=True))
        if self.kind == PANE_TRACE:
            trace = views.shot if self.source == "shot" or views.stack is None else views.stack
            spec = trace_spec(trace)
        else:
            spectrum = views.shot_spectrum if self.source == "shot" or views.stack_spectrum is None \
                else views.stack_spectrum
            spec = spectrum_spec(spectrum)
        return Text("\n").join(render_plot(spec, width, height))


def render_sections(sections: list, width: int, height: int) -> list[Text]:
    """Plots stacked in `height` rows, each but the first (whose caption is the pane's title) under
    its caption; the last are left out when each would be too small."""
    while len(sections) > 1 and height // len(sections) < MIN_SECTION_ROWS:
        sections = sections[:-1]
    rows = height // len(sections)
    lines: list[Text] = []
    for i, (caption, spec) in enumerate(sections):
        own = rows if i < len(sections) - 1 else height - rows * i
        caption_lines = [Text(caption[:width], Style(bold=True))] if i else []
        lines += caption_lines + render_plot(spec, width, own - len(caption_lines))
    return lines
