"""Outputs written atomically: JSON documents, CSV tables and figures.

Every file goes to a temporary name in the target folder and is renamed into place only when
complete, so an interrupted run never leaves half a file. Non-finite numbers are refused before
anything is written.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import numpy as np


@contextmanager
def atomic_path(target: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; rename it onto ``target`` on success.

    On any exception (including KeyboardInterrupt) the temporary file is removed and the target
    is left as it was.
    """
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=f".tmp{target.suffix}",
                               dir=target.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp_path, 0o666 & ~umask)  # mkstemp makes 0600; give the usual permissions
    try:
        yield tmp_path
        os.replace(tmp_path, target)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()


def to_plain(value: Any) -> Any:
    """Convert numpy arrays/scalars and nested containers into JSON-ready Python objects.

    Raises
    ------
    ValueError
        If a NaN or infinity is found (it would be a silent meaningless number).
    """
    if isinstance(value, dict):
        return {str(k): to_plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return to_plain(value.tolist())
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        raise ValueError("a non-finite number reached an output")
    if isinstance(value, complex):
        return [to_plain(value.real), to_plain(value.imag)]
    return value


def write_json(path: str | Path, document: dict[str, Any]) -> None:
    """Write a JSON document atomically (UTF-8, Unicode labels kept as such)."""
    text = json.dumps(to_plain(document), ensure_ascii=False, indent=1)
    with atomic_path(path) as tmp:
        tmp.write_text(text + "\n", encoding="utf-8")


def write_csv(path: str | Path, header_lines: list[str], columns: list[str],
              rows: np.ndarray) -> None:
    """Write a CSV table atomically: ``#`` comment lines (units), a column line, the rows."""
    rows = np.asarray(rows, dtype=float)
    if not np.all(np.isfinite(rows)):
        raise ValueError("a non-finite number reached an output")
    write_table(path, header_lines, columns, [[f"{x:.10g}" for x in row] for row in rows])


def write_table(path: str | Path, header_lines: list[str], columns: list[str],
                rows: list[list[str]]) -> None:
    """Write a CSV table of already formatted cells atomically (empty cell = no value).

    Cells holding a comma or a quote are quoted (RFC 4180).
    """
    def cell(text: str) -> str:
        return f'"{text.replace(chr(34), 2 * chr(34))}"' if any(c in text for c in ',"\n') \
            else text

    lines = [f"# {h}" for h in header_lines] + [",".join(cell(c) for c in columns)]
    lines += [",".join(cell(c) for c in row) for row in rows]
    with atomic_path(path) as tmp:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")


def write_with(path: str | Path, writer: Callable[[Path], None]) -> None:
    """Call ``writer(tmp_path)`` (e.g. a figure's savefig) and move the result into place."""
    with atomic_path(path) as tmp:
        writer(tmp)
