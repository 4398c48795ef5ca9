"""Every key of the TUI, in one table: the key bars and the help screen are made from it."""

from __future__ import annotations

from rich.style import Style
from rich.text import Text

# (key as shown, what it does, where it works)
KEYS: tuple[tuple[str, str, str], ...] = (
    ("^X", "EMERGENCY STOP: stop now, empty the queue, coil off", "everywhere, also in dialogs"),
    ("s", "stop the run (rig made safe); the queue pauses", "everywhere"),
    ("g", "go: run the queue", "everywhere"),
    ("a", "acknowledge a trip (you type ACK to confirm)", "everywhere"),
    ("p", "plan: sequences, parameters, checks, queue", "everywhere"),
    ("w / esc", "watch: live views", "everywhere"),
    ("v", "plots show the last shot / the running stack", "watch"),
    ("h", "lower plot: spectrum / history of field and T2*", "watch"),
    ("↑ ↓ tab", "move; pick a sequence; pick a parameter", "plan"),
    ("enter", "edit the parameter (enter keeps, esc cancels)", "plan"),
    ("+", "queue the sequence as edited (only if every check passes)", "plan"),
    ("-", "take the last entry off the queue", "plan"),
    ("r", "revert the edits of this sequence", "plan"),
    ("? / F1", "this help", "everywhere"),
    ("q", "quit (asks first while a run is active)", "everywhere"),
)

WATCH_KEYS = [("^X", "E-STOP"), ("s", "stop"), ("g", "go"), ("p", "plan"), ("v", "shot/stack"),
              ("h", "spec/hist"), ("a", "ack"), ("?", "help"), ("q", "quit")]
PLAN_KEYS = [("^X", "E-STOP"), ("enter", "edit"), ("+", "queue"), ("-", "unqueue"), ("g", "go"),
             ("r", "revert"), ("w", "watch"), ("?", "help")]


def help_text() -> Text:
    text = Text()
    width = max(len(k) for k, _, _ in KEYS) + 2
    for key, what, where in KEYS:
        text.append(key.ljust(width), Style(bold=True))
        text.append(what)
        text.append(f"  [{where}]\n", Style(dim=True))
    text.append("\nEvery stop ends in the engine's safe state: current off, transmitter silent, coil path idle.\n"
                "Real coils store energy and get hot: read safety.md before running a real rig.", Style(dim=True))
    return text


HELP_TEXT = help_text()
