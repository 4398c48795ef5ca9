"""A sequence spec as a flat list of editable rows, generic over any spec dataclass.

Rows come from `dataclasses.fields` and the strict metadata of `controller.config.strict`
(min, max, gt, choices, help), with nested tables flattened to dotted keys
(`polarise.current_a`).  Edited text is turned back into the nested table and rebuilt with
`strict.build`, so the editor refuses exactly what a TOML file would be refused for, with
the same one-line message.

Text rules: an empty value means "not given" (the default applies; an optional table whose
rows are all empty is left out); a string field takes the text as typed; any other field is
read as a TOML value (`2.5`, `true`, `[1, 2]`).
"""

from __future__ import annotations

import dataclasses
import tomllib
import types
import typing
from dataclasses import dataclass
from typing import Any

from controller.config.strict import build

READ_ONLY_KEYS = ("kind",)  # the kind picks the dataclass: choose another file to change it
EDITOR_SOURCE = "sequence editor"


@dataclass(frozen=True)
class FormRow:
    key: str  # dotted path from the top of the spec
    type_name: str  # "number", "integer", "text", "true/false"
    allowed: str  # the range or choices, in words ("" when anything goes)
    help: str
    text: str  # the value as the operator sees it; "" = not given
    read_only: bool = False
    optional_table: str = ""  # dotted key of the optional table this row belongs to


def _leaf_type(tp: Any) -> tuple[Any, bool]:
    """(the type inside an Optional, whether None is allowed)."""
    if typing.get_origin(tp) in (typing.Union, types.UnionType):
        args = [a for a in typing.get_args(tp) if a is not type(None)]
        return (args[0] if len(args) == 1 else tp), type(None) in typing.get_args(tp)
    return tp, False


def _type_name(tp: Any) -> str:
    return {float: "number", int: "integer", str: "text", bool: "true/false"}.get(tp, getattr(tp, "__name__", "value"))


def allowed_text(meta: dict[str, Any]) -> str:
    """The metadata's bounds in words: '> 0, <= 100', 'linear | exponential', '>= 1'."""
    if "choices" in meta:
        return " | ".join(_format_value(c) for c in meta["choices"])
    parts = []
    if meta.get("gt") is not None:
        parts.append(f"> {meta['gt']:g}")
    if meta.get("min") is not None:
        parts.append(f">= {meta['min']:g}")
    if meta.get("max") is not None:
        parts.append(f"<= {meta['max']:g}")
    return ", ".join(parts)


def _format_value(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return f"{value:.10g}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_format_value(v) for v in value) + "]"
    return str(value)


def rows_of(spec_class: type, spec: Any | None, prefix: str = "", optional_table: str = "") -> list[FormRow]:
    """One row per leaf field of spec_class, filled from spec (None: all empty)."""
    hints = typing.get_type_hints(spec_class)
    rows: list[FormRow] = []
    for f in dataclasses.fields(spec_class):
        if not f.init:
            continue
        key = f"{prefix}{f.name}"
        tp, nullable = _leaf_type(hints[f.name])
        value = getattr(spec, f.name) if spec is not None else None
        if dataclasses.is_dataclass(tp):
            table = key if nullable else optional_table
            rows += rows_of(tp, value, prefix=f"{key}.", optional_table=table)
            continue
        meta = dict(f.metadata)
        rows.append(FormRow(key=key, type_name=_type_name(tp), allowed=allowed_text(meta), help=meta.get("help", ""),
                            text=_format_value(value), read_only=f.name in READ_ONLY_KEYS and not prefix,
                            optional_table=optional_table))
    return rows


def with_text(rows: list[FormRow], key: str, text: str) -> list[FormRow]:
    """A new row list with one row's text replaced."""
    if key not in {r.key for r in rows}:
        raise KeyError(key)
    return [dataclasses.replace(r, text=text.strip()) if r.key == key else r for r in rows]


def _parse(row: FormRow) -> Any:
    if row.type_name == "text":
        return row.text
    try:
        return tomllib.loads(f"value = {row.text}")["value"]
    except tomllib.TOMLDecodeError:
        return row.text  # strict.build then says what was expected


def table_of(rows: list[FormRow]) -> dict[str, Any]:
    """The nested table the rows stand for (what a TOML file with these values would hold)."""
    empty_tables = {r.optional_table for r in rows if r.optional_table}
    for r in rows:
        if r.optional_table and r.text:
            empty_tables.discard(r.optional_table)
    data: dict[str, Any] = {}
    for r in rows:
        if not r.text or (r.optional_table and r.optional_table in empty_tables):
            continue
        node = data
        *parents, leaf = r.key.split(".")
        for p in parents:
            node = node.setdefault(p, {})
        node[leaf] = _parse(r)
    return data


def spec_from_rows(spec_class: type, rows: list[FormRow]) -> Any:
    """Rebuild the spec; raises ConfigError naming the key, exactly as loading a file would."""
    return build(spec_class, table_of(rows), EDITOR_SOURCE)
