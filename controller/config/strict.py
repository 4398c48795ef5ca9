"""Build frozen dataclasses from TOML tables, strictly.

Every dataclass field may carry metadata:

* ``min`` / ``max``: inclusive numeric bounds;
* ``gt``: exclusive lower bound;
* ``choices``: the allowed values;
* ``min_items``: the least number of entries of a list;
* ``help``: a few words on what the value is (shown in errors).

Bounds on a list field apply to each of its entries.

Unknown keys are rejected: a typo is the most common configuration error, and a silently
ignored ``curent_a`` would leave a coil at its default current.
"""

from __future__ import annotations

import dataclasses
import difflib
import types
import typing
from typing import Any, TypeVar

from controller.errors import ConfigError

T = TypeVar("T")


def field(default: Any = dataclasses.MISSING, *, default_factory: Any = dataclasses.MISSING, **meta: Any) -> Any:
    """A dataclass field with validation metadata (min, max, gt, choices, help)."""
    if default_factory is not dataclasses.MISSING:
        return dataclasses.field(default_factory=default_factory, metadata=meta)
    return dataclasses.field(default=default, metadata=meta)


def _describe_type(tp: Any) -> str:
    names = {int: "an integer", float: "a number", str: "a string", bool: "true or false"}
    if tp in names:
        return names[tp]
    origin = typing.get_origin(tp)
    if origin in (tuple, list):
        (inner, *_) = typing.get_args(tp) or (Any,)
        return f"a list of {_describe_type(inner).removeprefix('a ').removeprefix('an ')}s"
    if origin in (typing.Union, types.UnionType):
        return " or ".join(_describe_type(a) for a in typing.get_args(tp) if a is not type(None))
    if dataclasses.is_dataclass(tp):
        return "a table"
    return getattr(tp, "__name__", str(tp))


def _convert(value: Any, tp: Any, file: str, key: str) -> Any:
    origin = typing.get_origin(tp)
    if origin in (typing.Union, types.UnionType):
        args = [a for a in typing.get_args(tp) if a is not type(None)]
        if value is None and type(None) in typing.get_args(tp):
            return None
        if len(args) == 1:  # Optional[X]: X's own error (e.g. a bad key inside a table) is the useful one
            return _convert(value, args[0], file, key)
        errors = []
        for arg in args:
            try:
                return _convert(value, arg, file, key)
            except ConfigError as exc:
                errors.append(exc)
        raise ConfigError(file, key, f"{value!r} is not {_describe_type(tp)}")
    if dataclasses.is_dataclass(tp):
        if not isinstance(value, dict):
            raise ConfigError(file, key, f"{value!r} is not a table")
        return build(tp, value, file, key)
    if origin in (tuple, list):
        (inner, *_) = typing.get_args(tp) or (Any,)
        if not isinstance(value, list):
            raise ConfigError(file, key, f"{value!r} is not {_describe_type(tp)}")
        return tuple(_convert(v, inner, file, f"{key}[{i}]") for i, v in enumerate(value))
    if tp is bool:
        if not isinstance(value, bool):
            raise ConfigError(file, key, f"{value!r} is not true or false")
        return value
    if tp is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise ConfigError(file, key, f"{value!r} is not an integer")
        return value
    if tp is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ConfigError(file, key, f"{value!r} is not a number")
        return float(value)
    if tp is str:
        if not isinstance(value, str):
            raise ConfigError(file, key, f"{value!r} is not a string")
        return value
    if tp is Any:
        return value
    raise TypeError(f"unsupported config type {tp!r} at {key}")


def _check_bounds(value: Any, meta: dict[str, Any], file: str, key: str) -> None:
    if isinstance(value, tuple):
        least = meta.get("min_items")
        if least is not None and len(value) < least:
            raise ConfigError(file, key, f"has {len(value)} entr{'y' if len(value) == 1 else 'ies'}; "
                              f"allowed: at least {least}" + (f" ({meta['help']})" if "help" in meta else ""))
        for i, item in enumerate(value):
            _check_bounds(item, {k: v for k, v in meta.items() if k != "min_items"}, file, f"{key}[{i}]")
        return
    help_text = f" ({meta['help']})" if "help" in meta else ""
    if "choices" in meta and value not in meta["choices"]:
        allowed = ", ".join(repr(c) for c in meta["choices"])
        raise ConfigError(file, key, f"{value!r} is not allowed; allowed: {allowed}{help_text}")
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        lo, hi, gt = meta.get("min"), meta.get("max"), meta.get("gt")
        if gt is not None and not value > gt:
            bound = f"more than {gt}" + (f" and at most {hi}" if hi is not None else "")
            raise ConfigError(file, key, f"{value!r} is out of range; allowed: {bound}{help_text}")
        if (lo is not None and value < lo) or (hi is not None and value > hi):
            if lo is not None and hi is not None:
                bound = f"{lo} to {hi}"
            elif lo is not None:
                bound = f"at least {lo}"
            else:
                bound = f"at most {hi}"
            raise ConfigError(file, key, f"{value!r} is out of range; allowed: {bound}{help_text}")


def build(cls: type[T], data: dict[str, Any], file: str, prefix: str = "") -> T:
    """Build dataclass ``cls`` from ``data``; reject unknown keys, wrong types and out-of-range values."""
    hints = typing.get_type_hints(cls)
    fields = {f.name: f for f in dataclasses.fields(cls) if f.init}
    for key in data:
        if key not in fields:
            close = difflib.get_close_matches(key, list(fields), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            allowed = ", ".join(sorted(fields))
            raise ConfigError(file, _join(prefix, key), f"unknown key{hint} (allowed here: {allowed})")
    kwargs: dict[str, Any] = {}
    for name, f in fields.items():
        key = _join(prefix, name)
        if name not in data:
            if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING:
                raise ConfigError(file, key, f"missing; expected {_describe_type(hints[name])}"
                                  + (f" ({f.metadata['help']})" if "help" in f.metadata else ""))
            continue
        value = _convert(data[name], hints[name], file, key)
        if value is not None:
            _check_bounds(value, dict(f.metadata), file, key)
        kwargs[name] = value
    return cls(**kwargs)


def _join(prefix: str, key: str) -> str:
    return f"{prefix}.{key}" if prefix else key
