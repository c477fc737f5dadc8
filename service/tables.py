"""Tables for spreadsheets and workflows: schema-guided flattening, dotted-path selection, CSV.

CSV is UTF-8 with a byte-order mark (so desktop spreadsheets detect the encoding), `.` as the
decimal mark, a header row with units, and `,` or `;` as the separator.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np
from marshmallow import Schema, fields

from schemas.fields import Quantity
from schemas.polymorphic import Polymorphic
from service.jsonio import dumps_bytes

SEPARATORS = {",": ",", "comma": ",", ";": ";", "semicolon": ";"}


class SelectError(LookupError):
    """A dotted path that leads nowhere in the response."""


def select(data: Any, path: str) -> Any:
    """Follow a dotted path ("results.points.0.temperature") through dicts and lists."""
    current = data
    walked: list[str] = []
    for part in path.split("."):
        if isinstance(current, dict):
            if part not in current:
                options = ", ".join(sorted(current)) or "none"
                where = ".".join(walked) or "the top level"
                raise SelectError(f"No '{part}' under {where}; available: {options}.")
            current = current[part]
        elif isinstance(current, list):
            if not part.lstrip("-").isdigit() or not -len(current) <= int(part) < len(current):
                raise SelectError(f"'{part}' is not an index of {'.'.join(walked)}, which has "
                                  f"{len(current)} entries.")
            current = current[int(part)]
        else:
            raise SelectError(f"{'.'.join(walked)} is a single value; nothing lies below it.")
        walked.append(part)
    return current


def field_at(schema: Schema, path: str) -> fields.Field | None:
    """The schema field a dotted path ends on (list indices skipped), or None."""
    current: Any = schema
    found: fields.Field | None = None
    for part in path.split("."):
        if part.lstrip("-").isdigit():
            continue
        if isinstance(current, fields.List):
            current = current.inner
        if isinstance(current, fields.Nested):
            current = current.schema
        if isinstance(current, Polymorphic):
            current = next((c() for c in current.choices.values() if part in c().fields), None)
        if not isinstance(current, Schema) or part not in current.fields:
            return None
        found = current.fields[part]
        current = found
        if isinstance(current, fields.List):
            current = current.inner
    return found


def unit_of(schema: Schema, path: str, units: dict[str, str]) -> str:
    field = field_at(schema, path)
    if isinstance(field, fields.List):
        field = field.inner
    return units.get(field.kind, "") if isinstance(field, Quantity) else ""


def flatten(schema: Schema, data: Any, units: dict[str, str],
            prefix: str = "") -> list[tuple[str, Any, str]]:
    """(path, value, unit) for every leaf of a dumped response, guided by its schema."""
    rows: list[tuple[str, Any, str]] = []
    for name, field in schema.fields.items():
        key = field.data_key or name
        if not isinstance(data, dict) or key not in data or key == "units":
            continue
        _flatten_field(field, data[key], units, f"{prefix}{key}", rows)
    return rows


def _flatten_field(field: fields.Field, value: Any, units: dict[str, str], path: str,
                   rows: list[tuple[str, Any, str]]) -> None:
    if isinstance(value, np.ndarray):
        value = value.tolist()
    if isinstance(field, fields.Nested) and isinstance(value, dict):
        rows.extend(flatten(field.schema, value, units, path + "."))
    elif isinstance(field, fields.List) and isinstance(value, list):
        for i, item in enumerate(value):
            _flatten_field(field.inner, item, units, f"{path}.{i}", rows)
    elif isinstance(value, list):
        unit = units.get(field.kind, "") if isinstance(field, Quantity) else ""
        _flatten_plain(value, path, unit, rows)
    elif isinstance(value, dict):
        for key, item in value.items():
            _flatten_field(field, item, units, f"{path}.{key}", rows)
    else:
        rows.append((path, value, units.get(field.kind, "") if isinstance(field, Quantity)
                     else ""))


def _flatten_plain(value: Any, path: str, unit: str, rows: list[tuple[str, Any, str]]) -> None:
    if isinstance(value, list):
        for i, item in enumerate(value):
            _flatten_plain(item, f"{path}.{i}", unit, rows)
    else:
        rows.append((path, value, unit))


def text_value(value: Any) -> str:
    """A cell value as text: numbers in shortest round-trip form, None empty, others JSON."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, int | float | str):
        return str(value)
    return dumps_bytes(value).decode()


def write_csv(header: Sequence[str], rows: Iterable[Sequence[Any]], separator: str = ",") -> str:
    buffer = io.StringIO()
    buffer.write("\ufeff")
    writer = csv.writer(buffer, delimiter=separator, lineterminator="\r\n")
    writer.writerow(header)
    for row in rows:
        writer.writerow([text_value(v) for v in row])
    return buffer.getvalue()
