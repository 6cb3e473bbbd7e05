"""The one TOML reader: files and parsed documents in, checked values out, every failure as one
:class:`~bandpert.errors.InputError` line naming the file and the dotted key.

It serves material files (:mod:`bandpert.input.material`), k·p parameter files
(:mod:`bandpert.input.kp_file`) and the documents a sweep rewrites point by point. It knows no
physics: it reads strings, numbers, integers, arrays and tables, refuses unknown keys, and keeps
every echoed value short (:data:`MAX_ECHO`) so that a message stays one readable line.

Depth is bounded (:data:`MAX_DEPTH`): no schema of the tool nests deeper than five levels, and a
deeper document (``a = [[[[...]]]]``) is refused with one line instead of exhausting the
interpreter's recursion limit in the parser or in the checks after it.
"""

from __future__ import annotations

import json
import math
import tomllib
from pathlib import Path
from typing import Any

from ..errors import InputError

#: Deepest nesting of arrays and tables accepted in a document (the schemas need at most 5:
#: ``potential.coefficients[i].value[j]``).
MAX_DEPTH = 16

#: Longest echo of a value inside a message, in characters (longer ones are cut with "...").
MAX_ECHO = 60


def shorten(text: str, limit: int = MAX_ECHO) -> str:
    """``text`` cut to ``limit`` characters (ending in "...") so that messages stay short."""
    return text if len(text) <= limit else text[:limit - 3] + "..."


def describe(value: Any) -> str:
    """Describe a value's TOML type for a message, with the value itself when it is short."""
    kind = {bool: "a boolean", int: "an integer", float: "a number", str: "a string",
            list: "an array", dict: "a table"}.get(type(value), type(value).__name__)
    if isinstance(value, (bool, int, float, str)):
        text = str(value).lower() if isinstance(value, bool) else repr(value)
        if len(text) <= 30:
            kind += f" ({text})"
    return kind


def entries(n: int) -> str:
    """``"1 entry"`` or ``"n entries"``."""
    return f"{n} entry" if n == 1 else f"{n} entries"


def show_list(values: list) -> str:
    """A short array as TOML would write it (``[true, 1.5]``), cut after :data:`MAX_ECHO`."""
    return shorten(json.dumps(values, default=str, ensure_ascii=False))


def show_complex(z: complex) -> str:
    """A complex number for a message: ``1.5`` when real, else ``[re, im]`` as in the file."""
    return f"{z.real:g}" if z.imag == 0 else f"[{z.real:g}, {z.imag:g}]"


def depth(value: Any) -> int:
    """Nesting depth of arrays and tables (a scalar is 0, ``[1]`` is 1), found without recursion.

    Stops counting once :data:`MAX_DEPTH` is exceeded, so a hostile document costs little.
    """
    deepest = 0
    stack = [(value, 0)]
    while stack:
        item, level = stack.pop()
        if isinstance(item, dict):
            children = item.values()
        elif isinstance(item, (list, tuple)):
            children = item
        else:
            continue
        level += 1
        deepest = max(deepest, level)
        if deepest > MAX_DEPTH:
            break
        stack.extend((child, level) for child in children)
    return deepest


def check_depth(doc: Any, source: str) -> None:
    """Refuse a document nested deeper than :data:`MAX_DEPTH` (one line, no recursion)."""
    if depth(doc) > MAX_DEPTH:
        raise InputError(f"arrays or tables are nested more than {MAX_DEPTH} levels deep; "
                         "expected a document in the bandpert schema (at most 5 levels)", source)


class TableReader:
    """Walks one table of a parsed document, checking keys and types, naming file and key.

    Parameters
    ----------
    table : dict
        The table.
    source : str
        The file (for messages).
    prefix : str
        Dotted key of the table with a trailing dot (``"lattice."``), "" for the top level.
    """

    def __init__(self, table: dict[str, Any], source: str, prefix: str = ""):
        self.table = table
        self.source = source
        self.prefix = prefix
        self.used: set[str] = set()

    def key(self, name: str) -> str:
        """The dotted key of ``name`` in this table."""
        return f"{self.prefix}{name}"

    def fail(self, name: str, problem: str) -> InputError:
        """An :class:`InputError` for key ``name`` of this table ("" names the table itself)."""
        return InputError(problem, self.source, self.key(name) if name else self.prefix.rstrip("."))

    def has(self, name: str) -> bool:
        return name in self.table

    def raw(self, name: str, required: bool = True) -> Any:
        """The value as parsed, None when absent (refused when ``required``)."""
        self.used.add(name)
        if self.table.get(name) is None:  # TOML has no null; None from code means "absent"
            if required:
                raise self.fail(name, "missing; this key is required")
            return None
        return self.table[name]

    def string(self, name: str, required: bool = True, default: str = "",
               choices: tuple[str, ...] | None = None) -> str:
        value = self.raw(name, required)
        if value is None:
            return default
        if not isinstance(value, str):
            raise self.fail(name, f"expected a string, got {describe(value)}")
        if choices is not None and value not in choices:
            raise self.fail(name, f"'{shorten(value)}' is not one of: {', '.join(choices)}")
        return value

    def number(self, name: str, required: bool = True, positive: bool = False,
               default: float | None = None, bounds: tuple[float, float] | None = None,
               meaning: str = "") -> float | None:
        """A finite number; with ``bounds`` it must lie in [lo, hi] (``meaning`` says why)."""
        value = self.raw(name, required)
        if value is None:
            return default
        x = number(value, self, name, positive)
        if bounds is not None:
            check_range(x, bounds, self, name, meaning)
        return x

    def integer(self, name: str, required: bool = True, minimum: int | None = None,
                maximum: int | None = None, meaning: str = "") -> int | None:
        value = self.raw(name, required)
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, int):
            raise self.fail(name, f"expected an integer, got {describe(value)}")
        if minimum is not None and value < minimum:
            raise self.fail(name, f"must be at least {minimum}, got {shorten(str(value))}")
        if maximum is not None and value > maximum:
            why = f" ({meaning})" if meaning else ""
            raise self.fail(name, f"{shorten(str(value))} is too large; expected at most "
                                  f"{maximum}{why}")
        return value

    def sub(self, name: str, required: bool = True) -> TableReader | None:
        """A reader of the sub-table ``name`` (None when absent and not required)."""
        value = self.raw(name, required)
        if value is None:
            return None
        if not isinstance(value, dict):
            raise self.fail(name, f"expected a table, got {describe(value)}")
        return TableReader(value, self.source, f"{self.key(name)}.")

    def finish(self) -> None:
        """Refuse any key of the table that was not read."""
        unknown = sorted(set(self.table) - self.used)
        if unknown:
            allowed = ", ".join(sorted(self.used)) or "none"
            raise self.fail(shorten(unknown[0], 40), f"unknown key (allowed here: {allowed})")


def number(value: Any, reader: TableReader, name: str, positive: bool = False) -> float:
    """A finite float from a TOML number (integers converted), refused otherwise."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise reader.fail(name, f"expected a number, got {describe(value)}")
    try:
        value = float(value)
    except OverflowError:
        raise reader.fail(name, "expected a finite number, got an integer too large for a "
                                "float") from None
    if not math.isfinite(value):
        raise reader.fail(name, f"expected a finite number, got {value}")
    if positive and value <= 0:
        raise reader.fail(name, f"must be positive, got {value:g}")
    return value


def check_range(x: float, bounds: tuple[float, float], reader: TableReader, name: str,
                meaning: str = "") -> None:
    """Refuse ``x`` outside [lo, hi], naming the range (and what it keeps finite)."""
    lo, hi = bounds
    if not lo <= x <= hi:
        why = f" ({meaning})" if meaning else ""
        raise reader.fail(name, f"{x:g} is outside the accepted range {lo:g} to {hi:g}{why}")


def number_list(value: Any, reader: TableReader, name: str, length: int | None = None,
                positive: bool = False) -> tuple[float, ...]:
    """A tuple of finite floats from a TOML array (of ``length`` entries when given)."""
    if not isinstance(value, list):
        raise reader.fail(name, f"expected an array of numbers, got {describe(value)}")
    if length is not None and len(value) != length:
        raise reader.fail(name, f"expected {length} numbers, got {entries(len(value))}")
    return tuple(number(v, reader, name, positive) for v in value)


def read_header(doc: Any, source: str) -> tuple[TableReader, str, str, str]:
    """Start reading a document: check it is a table and read ``name``, ``source``, ``note``.

    Returns the reader (for the remaining keys) and the three strings.
    """
    if not isinstance(doc, dict):
        raise InputError(f"expected a document of keys and tables, got {describe(doc)}", source)
    check_depth(doc, source)
    r = TableReader(doc, source)
    name = r.string("name")
    if not name.strip():
        raise r.fail("name", "must not be empty; expected the material's name")
    src = r.string("source")
    if not src.strip():
        raise r.fail("source", "must not be empty; expected where the parameters come from")
    return r, name, src, r.string("note", required=False)


def read_toml_document(path: str | Path, what: str = "a material TOML file") -> dict[str, Any]:
    """Read a UTF-8 TOML file into a dictionary, every failure as one :class:`InputError`.

    Parameters
    ----------
    path : str or pathlib.Path
    what : str
        What the file should be, for the messages (e.g. "a material TOML file").
    """
    path = Path(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"file not found; expected {what}", str(path)) from None
    except IsADirectoryError:
        raise InputError(f"is a folder; expected {what}", str(path)) from None
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror or exc.__class__.__name__}); expected "
                         f"{what} that can be read", str(path)) from None
    try:
        text = data.decode("utf-8-sig")  # a leading byte-order mark is harmless
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise InputError(f"is not UTF-8 text (invalid byte 0x{data[exc.start]:02x} on line "
                         f"{line}); expected {what} in UTF-8", str(path)) from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML ({shorten(str(exc), 120)})", str(path)) from None
    except RecursionError:  # the parser recurses once per level of nesting
        raise InputError(f"arrays or tables are nested too deeply to parse (more than "
                         f"{MAX_DEPTH} levels); expected {what}", str(path)) from None
    check_depth(doc, str(path))
    return doc


def species_tables(r: TableReader, species_names: set[str], dimension: int, table: str,
                   needs_3d: str) -> TableReader:
    """The ``species`` sub-table of a per-species term (``[spin_orbit]``, ``[nonlocal]``).

    Refuses, naming the key, a lattice that is not 3D (``needs_3d`` opens the message: what
    needs 3D and why) and a species no atom carries; returns the reader of ``species``.
    """
    if dimension != 3:
        raise r.fail("", f"{needs_3d}, this one is {dimension}D; expected no {table} table")
    sp = r.sub("species")
    for name in sp.table:
        if name not in species_names:
            raise sp.fail(name, f"unknown species '{name}'; expected one of the atoms' species "
                                f"({', '.join(sorted(species_names))})")
    return sp
