"""Every key of the TUI, in one table: the key bars and the help screen are made from it."""

from __future__ import annotations

from rich.style import Style
from rich.text import Text

# (key as shown, what it does, screen: "" = everywhere)
KEYS: tuple[tuple[str, str, str], ...] = (
    ("^X", "EMERGENCY STOP: stop now, empty the queue, coil off (also in dialogs)", ""),
    ("s", "stop the run (rig made safe); the queue pauses", ""),
    ("g", "go: run the queue", ""),
    ("a", "acknowledge a trip (type the rig's name to confirm)", ""),
    ("p", "plan: sequences, parameters, checks, queue", ""),
    ("w / esc", "back to the live views", ""),
    ("? / F1", "this help", ""),
    ("q", "quit (asks first while a run is active)", ""),
    ("v", "plots show the last shot / the running stack", "watch"),
    ("h", "lower plot: spectrum / history of field and T2*", "watch"),
    ("↑ ↓ tab", "move; pick a sequence, then a parameter", "plan"),
    ("enter", "edit the parameter (enter keeps, esc cancels)", "plan"),
    ("+", "queue the sequence as edited (only if every check passes)", "plan"),
    ("-", "take the last entry off the queue", "plan"),
    ("r", "revert the edits of this sequence", "plan"),
)
SCOPE_TITLES = {"": "on every screen", "watch": "watch screen (live views)", "plan": "plan screen"}

WATCH_KEYS = [("^X", "E-STOP"), ("s", "stop"), ("g", "go"), ("p", "plan"), ("v", "shot/stack"),
              ("h", "spec/hist"), ("a", "ack"), ("?", "help"), ("q", "quit")]
PLAN_KEYS = [("^X", "E-STOP"), ("enter", "edit"), ("+", "queue"), ("-", "unqueue"), ("g", "go"),
             ("r", "revert"), ("w", "watch"), ("?", "help")]


def help_text() -> Text:
    text = Text()
    width = max(len(k) for k, _, _ in KEYS) + 2
    for scope, title in SCOPE_TITLES.items():
        text.append(f"{title}\n", Style(bold=True, underline=True))
        for key, what, where in KEYS:
            if where == scope:
                text.append(key.rjust(width - 2) + "  ", Style(bold=True))
                text.append(f"{what}\n")
    text.append("Every stop ends in the safe state: current off, transmitter silent, coil path idle.\n"
                "Real coils store energy and get hot: read safety.md first.", Style(dim=True))
    return text


HELP_TEXT = help_text()
