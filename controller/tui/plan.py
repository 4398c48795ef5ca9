"""Plan a run from the TUI: list sequence files, rebuild an edited spec, prepare and check it.

The checks are `controller.checks.check_all`, the same ones `precess check` prints and
`precess run` enforces; a plan with a violation cannot be queued.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from controller.checks import Violation, check_all, predicted_peak_temperature_c
from controller.cli.common import config_snapshot
from controller.config.loader import LoadedRig, load_sequence
from controller.errors import PrecessError
from controller.runner import prepare_spec
from controller.sequences.describe import describe_timeline
from controller.sequences.timeline import Timeline
from controller.tui.form import FormRow, rows_of, spec_from_rows
from controller.tui.session import QueuedRun


@dataclass(frozen=True)
class SequenceFile:
    """A sequence file found for the plan screen; `error` says why it cannot be used."""

    path: Path
    spec: Any | None
    error: str = ""

    @property
    def label(self) -> str:
        return self.spec.name if self.spec is not None else self.path.stem


@dataclass(frozen=True)
class PlanCheck:
    """An edited spec, compiled and checked against the rig."""

    spec: Any | None
    timeline: Timeline | None
    error: str
    violations: tuple[Violation, ...]
    peak_temperature_c: float | None
    description: tuple[str, ...]

    @property
    def ready(self) -> bool:
        return self.timeline is not None and not self.error and not self.violations


def find_sequences(directory: Path) -> list[SequenceFile]:
    """Every *.toml in directory, loaded strictly; files that fail are listed with their error."""
    found = []
    for path in sorted(directory.glob("*.toml")):
        try:
            found.append(SequenceFile(path, load_sequence(path)))
        except PrecessError as exc:
            found.append(SequenceFile(path, None, str(exc)))
    return found


def form_of(entry: SequenceFile) -> list[FormRow]:
    if entry.spec is None:
        return []
    return rows_of(type(entry.spec), entry.spec)


def check_rows(spec_class: type, rows: list[FormRow], loaded: LoadedRig, source: Path) -> PlanCheck:
    """Rebuild the spec from rows, prepare it as `precess run` does (pulse frequency, calibration
    beside the sequence file, compile for the rig's converter clock) and run every check.

    Without a store the pulse frequency is the site's prediction; at run time the session
    prepares the spec again with the store open, so "last measurement" applies there.
    """
    try:
        spec = spec_from_rows(spec_class, rows)
        timeline = prepare_spec(spec, str(source), loaded).timeline
    except (PrecessError, ValueError, TypeError) as exc:
        return PlanCheck(None, None, str(exc), (), None, ())
    violations = tuple(check_all(timeline, loaded.config))
    peak = predicted_peak_temperature_c(timeline, loaded.config)
    return PlanCheck(spec, timeline, "", violations, peak, tuple(describe_timeline(timeline)))


def queued_run(check: PlanCheck, loaded: LoadedRig, source: Path) -> QueuedRun:
    """The queue item for a ready plan (its config snapshot says it was edited in the TUI)."""
    if not check.ready:
        raise ValueError("only a plan that passes every check can be queued")
    snapshot = config_snapshot(loaded, check.spec, str(source))
    snapshot["edited_in"] = "precess tui"
    label = f"{check.spec.name} ×{len(check.timeline.shots)}"
    return QueuedRun(label=label, spec=check.spec, source=str(source), timeline=check.timeline,
                     config_snapshot=snapshot)
