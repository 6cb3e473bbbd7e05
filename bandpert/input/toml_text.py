"""TOML text of a parsed document (the inverse of ``tomllib.loads`` for material files).

Writes what material and targets files hold: strings, numbers, booleans, arrays, tables
(``[a.b]``) and arrays of tables (``[[atoms]]``). Floats are written with ``repr`` so that a
round trip through :mod:`tomllib` returns the same numbers bit for bit.
"""

from __future__ import annotations

import json
import math
import re
from typing import Any

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(key: str) -> str:
    return key if _BARE_KEY.match(key) else json.dumps(key, ensure_ascii=False)


def _value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_key(k)} = {_value(v)}" for k, v in value.items()) + "}"
    raise TypeError(f"cannot write {type(value).__name__} as TOML")


def _is_table_array(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, dict) for v in value)


def _table(doc: dict[str, Any], path: list[str], lines: list[str]) -> None:
    for k, v in doc.items():
        if not isinstance(v, dict) and not _is_table_array(v):
            lines.append(f"{_key(k)} = {_value(v)}")
    for k, v in doc.items():
        name = ".".join(_key(p) for p in [*path, k])
        if isinstance(v, dict):
            if any(not isinstance(x, dict) for x in v.values()) or not v:
                lines.append(f"\n[{name}]")
            _table(v, [*path, k], lines)
        elif _is_table_array(v):
            for item in v:
                lines.append(f"\n[[{name}]]")
                _table(item, [*path, k], lines)


def to_toml(doc: dict[str, Any]) -> str:
    """TOML text of a document; ``tomllib.loads(to_toml(doc)) == doc``."""
    lines: list[str] = []
    _table(doc, [], lines)
    return "\n".join(lines).lstrip("\n") + "\n"
