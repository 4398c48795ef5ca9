"""Sequence editing in the TUI: generic over spec dataclasses, and exactly as strict as a file."""

from __future__ import annotations

import dataclasses
import re

import pytest

from controller.checks import check_all
from controller.config.loader import load_rig, load_sequence
from controller.errors import ConfigError
from controller.tui.form import rows_of, spec_from_rows, table_of, with_text
from controller.tui.plan import check_rows, find_sequences, form_of, queued_run

from tests.conftest import CONFIGS, DEMO_RIG

SEQUENCE_FILES = sorted((CONFIGS / "sequences").glob("*.toml"))


def _leaves(cls, prefix=""):
    import typing
    hints = typing.get_type_hints(cls)
    for f in dataclasses.fields(cls):
        tp = hints[f.name]
        inner = [a for a in typing.get_args(tp) if a is not type(None)] or [tp]
        if dataclasses.is_dataclass(inner[0]):
            yield from _leaves(inner[0], f"{prefix}{f.name}.")
        else:
            yield f"{prefix}{f.name}"


@pytest.mark.parametrize("path", SEQUENCE_FILES, ids=lambda p: p.stem)
def test_every_example_sequence_round_trips_through_the_form(path):
    spec = load_sequence(path)
    rows = rows_of(type(spec), spec)
    assert [r.key for r in rows] == list(_leaves(type(spec)))
    assert spec_from_rows(type(spec), rows) == spec


@pytest.mark.parametrize("key, text", [("polarise.current_a", "lots"), ("shots", "0"), ("shots", "2.5"),
                                       ("switch_off.shape", "square"), ("receive.acquire_s", "-1")])
def test_editor_refuses_with_the_message_a_file_gets(write_toml, key, text):
    spec = load_sequence(CONFIGS / "sequences" / "fid-sudden.toml")
    rows = with_text(rows_of(type(spec), spec), key, text)
    with pytest.raises(ConfigError) as in_editor:
        spec_from_rows(type(spec), rows)
    # the same value in a TOML file, loaded the ordinary way
    table = table_of(with_text(rows, key, ""))
    *parents, leaf = key.split(".")
    node = table
    for p in parents:
        node = node.setdefault(p, {})
    node[leaf] = "__VALUE__"
    toml = _to_toml(table).replace('"__VALUE__"', text if text.lstrip("-").replace(".", "").isdigit() else f'"{text}"')
    with pytest.raises(ConfigError) as in_file:
        load_sequence(write_toml("edited.toml", toml))
    strip = lambda msg: re.sub(r"^[^:]+: ", "", msg)  # noqa: E731 - drop the file name
    assert strip(str(in_editor.value)) == strip(str(in_file.value))


def _to_toml(table, prefix=""):
    scalars = [f"{k} = {_value(v)}" for k, v in table.items() if not isinstance(v, dict)]
    tables = [f"\n[{prefix}{k}]\n" + _to_toml(v, f"{prefix}{k}.") for k, v in table.items() if isinstance(v, dict)]
    return "\n".join(scalars) + "".join(tables) + "\n"


def _value(v):
    return f'"{v}"' if isinstance(v, str) else ("true" if v is True else "false" if v is False else repr(v))


def test_optional_table_left_empty_is_absent_and_partly_filled_names_the_missing_key():
    spec = load_sequence(CONFIGS / "sequences" / "fid-sudden.toml")
    rows = rows_of(type(spec), spec)
    assert spec_from_rows(type(spec), rows).pulse is None
    with pytest.raises(ConfigError, match=r"pulse\.amplitude_v: missing"):
        spec_from_rows(type(spec), with_text(rows, "pulse.duration_s", "0.005"))
    full = with_text(with_text(rows, "pulse.duration_s", "0.005"), "pulse.amplitude_v", "0.4")
    assert spec_from_rows(type(spec), full).pulse.amplitude_v == 0.4


def test_checks_are_precess_checks_and_only_a_ready_plan_can_be_queued():
    loaded = load_rig(DEMO_RIG)
    (entry,) = [s for s in find_sequences(CONFIGS / "sequences") if s.label == "fid-sudden"]
    ready = check_rows(type(entry.spec), form_of(entry), loaded, entry.path)
    assert ready.ready and ready.peak_temperature_c > loaded.config.coil.ambient_c
    item = queued_run(ready, loaded, entry.path)
    assert len(item.timeline.shots) == entry.spec.shots and item.config_snapshot["edited_in"] == "precess tui"
    hot = check_rows(type(entry.spec), with_text(form_of(entry), "polarise.current_a", "3.2"), loaded, entry.path)
    assert [str(v) for v in hot.violations] == [str(v) for v in check_all(hot.timeline, loaded.config)]
    assert hot.violations and not hot.ready
    with pytest.raises(ValueError):
        queued_run(hot, loaded, entry.path)


def test_a_broken_sequence_file_is_listed_with_its_error(tmp_path):
    (tmp_path / "good.toml").write_text((CONFIGS / "sequences" / "fid-sudden.toml").read_text())
    (tmp_path / "typo.toml").write_text('name = "t"\nshots = 2\n[polarise]\ncurent_a = 1.0\nduration_s = 1.0\n')
    found = {s.path.name: s for s in find_sequences(tmp_path)}
    assert found["good.toml"].spec is not None
    assert found["typo.toml"].spec is None and "did you mean 'current_a'" in found["typo.toml"].error
