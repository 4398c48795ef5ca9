"""A plan as sections of rows: one structure gives both the human table and the JSON object.

Each row holds its value in the unit its JSON key names (``field_per_amp_t_per_a``) and a
display unit and scale for people (``mT/A``, x 1e3).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any


@dataclass(frozen=True)
class Row:
    key: str
    label: str
    value: Any
    unit: str = ""
    scale: float = 1.0
    digits: str = ".4g"
    note: str = ""

    def text(self) -> str:
        v = self.value
        if isinstance(v, bool):
            return "yes" if v else "no"
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            if isinstance(v, float) and not math.isfinite(v):
                return "unbounded" if v > 0 else "-"
            shown = v * self.scale
            return format(shown, self.digits) + (f" {self.unit}" if self.unit else "")
        return str(v) + (f" {self.unit}" if self.unit else "")


@dataclass(frozen=True)
class Section:
    key: str
    title: str
    rows: tuple[Row, ...]
    notes: tuple[str, ...] = field(default=())


def _json_value(v: Any) -> Any:
    if isinstance(v, float) and not math.isfinite(v):
        return None
    if isinstance(v, (list, tuple)):
        return [_json_value(x) for x in v]
    return v


def as_json_object(sections: list[Section]) -> dict[str, Any]:
    """{section key: {row key: value, ..., "notes": [...]}}; non-finite numbers become null."""
    out: dict[str, Any] = {}
    for s in sections:
        body: dict[str, Any] = {r.key: _json_value(r.value) for r in s.rows}
        if s.notes:
            body["notes"] = list(s.notes)
        out[s.key] = body
    return out


def as_text(sections: list[Section]) -> str:
    """Sections as aligned two-column tables with notes under each."""
    lines: list[str] = []
    for s in sections:
        width = max((len(r.label) for r in s.rows), default=10)
        lines.append(s.title)
        for r in s.rows:
            value = r.text()
            lines.append(f"  {r.label:<{width}}  {value}" + (f"   ({r.note})" if r.note else ""))
        for n in s.notes:
            lines.append(f"  * {n}")
        lines.append("")
    return "\n".join(lines).rstrip() + "\n"


def table_text(columns: list[tuple[str, str, str]], records: list[dict[str, Any]]) -> str:
    """A plain column table: columns are (key, header, format spec)."""
    cells = [[format(rec[k], f) if f else str(rec[k]) for k, _, f in columns] for rec in records]
    widths = [max(len(h), *(len(c[i]) for c in cells)) for i, (_, h, _) in enumerate(columns)]
    head = "  ".join(h.rjust(w) for (_, h, _), w in zip(columns, widths))
    body = ["  ".join(c.rjust(w) for c, w in zip(row, widths)) for row in cells]
    return "\n".join([head, *body]) + "\n"
