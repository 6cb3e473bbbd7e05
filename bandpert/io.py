"""Outputs written atomically: JSON documents, CSV tables and figures, one file or a whole set.

Every file goes to a temporary name in the target folder and is renamed into place only when
complete, so an interrupted run never leaves half a file. Non-finite numbers are refused before
anything is written.

Inside :func:`all_or_nothing` (the CLI runs every command inside it) a command's files are
*staged*: each is written complete into a hidden staging folder inside its target folder
(``.bandpert-<pid>-<random>.staging``), and only when the block ends without an error are they
renamed into place, one ``os.replace`` each. A failure anywhere, even after the first file was
written, discards the whole set: the folder keeps its previous files and gains nothing. Before
the renames a ``COMMIT`` list is written into each staging folder; a process killed during the
renames (a window of microseconds) leaves that list behind, and the next write into the folder
completes the set from it, while a staging folder of a dead process without the list is simply
removed. Temporary names carry the writer's process id, so leftovers of a killed process are
recognised and cleaned by the next write into the same folder, and a concurrent live writer is
left alone.
"""

from __future__ import annotations

import contextvars
import json
import math
import os
import shutil
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import numpy as np

#: Prefix of every temporary file and staging folder (followed by the writer's process id).
TEMP_PREFIX = ".bandpert-"

#: Name of the list of renames written into a staging folder just before they are done.
COMMIT_NAME = "COMMIT"


class _Staging:
    """The files of one :func:`all_or_nothing` block: target → staged path, by folder."""

    def __init__(self) -> None:
        self.folders: dict[Path, Path] = {}      # target folder → its staging folder
        self.targets: dict[Path, Path] = {}      # target file → staged file

    def path_for(self, target: Path) -> Path:
        parent = target.parent.resolve()
        if parent not in self.folders:
            parent.mkdir(parents=True, exist_ok=True)
            clean_stale(parent)
            self.folders[parent] = Path(tempfile.mkdtemp(
                prefix=f"{TEMP_PREFIX}{os.getpid()}-", suffix=".staging", dir=parent))
        staged = self.folders[parent] / f"{len(self.targets)}-{target.name}"
        self.targets[parent / target.name] = staged
        return staged

    def commit(self) -> None:
        by_folder: dict[Path, list[tuple[str, str]]] = {f: [] for f in self.folders}
        for target, staged in self.targets.items():
            by_folder[target.parent].append((staged.name, target.name))
        for folder, staging in self.folders.items():
            text = json.dumps(by_folder[folder], ensure_ascii=False)
            (staging / f"{COMMIT_NAME}.tmp").write_text(text, encoding="utf-8")
            os.replace(staging / f"{COMMIT_NAME}.tmp", staging / COMMIT_NAME)
        for staging in self.folders.values():
            _finish(staging)

    def discard(self) -> None:
        for staging in self.folders.values():
            shutil.rmtree(staging, ignore_errors=True)


_STAGING: contextvars.ContextVar[_Staging | None] = contextvars.ContextVar("bandpert_staging",
                                                                           default=None)


def _finish(staging: Path) -> None:
    """Do the renames listed in a staging folder's COMMIT list, then remove the folder."""
    renames = json.loads((staging / COMMIT_NAME).read_text(encoding="utf-8"))
    for staged, target in renames:
        if (staging / staged).exists():
            os.replace(staging / staged, staging.parent / target)
    shutil.rmtree(staging, ignore_errors=True)


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's live process
        return True
    return True


def clean_stale(folder: str | Path) -> None:
    """Remove what killed writers left in ``folder``; complete a set whose renames had begun.

    Only entries named ``.bandpert-<pid>-…`` whose process no longer runs are touched.
    """
    folder = Path(folder)
    try:
        entries = list(folder.iterdir())
    except OSError:
        return
    for entry in entries:
        if not entry.name.startswith(TEMP_PREFIX):
            continue
        pid_text = entry.name[len(TEMP_PREFIX):].split("-", 1)[0]
        if not pid_text.isdigit() or _alive(int(pid_text)):
            continue
        if entry.is_dir():
            if (entry / COMMIT_NAME).exists():
                _finish(entry)
            else:
                shutil.rmtree(entry, ignore_errors=True)
        else:
            entry.unlink(missing_ok=True)


@contextmanager
def all_or_nothing() -> Iterator[None]:
    """Stage every file written through this module in the block; move them all into place at
    the end, or none if the block raises (including KeyboardInterrupt).

    Blocks nest: an inner block joins the outer one.
    """
    if _STAGING.get() is not None:
        yield
        return
    staging = _Staging()
    token = _STAGING.set(staging)
    try:
        yield
    except BaseException:
        staging.discard()
        raise
    else:
        staging.commit()
    finally:
        _STAGING.reset(token)


@contextmanager
def atomic_path(target: str | Path) -> Iterator[Path]:
    """Yield a temporary path for ``target``; it becomes ``target`` when complete.

    Outside :func:`all_or_nothing` the temporary file sits beside ``target`` and is renamed onto
    it when the block ends; inside, it is staged and moved with the rest of the set. On any
    exception (including KeyboardInterrupt) the temporary file is removed and the target is left
    as it was.
    """
    target = Path(target)
    staging = _STAGING.get()
    if staging is not None:
        tmp_path = staging.path_for(target)
        try:
            yield tmp_path
        except BaseException:
            tmp_path.unlink(missing_ok=True)
            raise
        _ordinary_permissions(tmp_path)
        return
    target.parent.mkdir(parents=True, exist_ok=True)
    clean_stale(target.parent)
    fd, tmp = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{os.getpid()}-{target.name}.",
                               suffix=".tmp", dir=target.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        _ordinary_permissions(tmp_path)
        os.replace(tmp_path, target)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()


def _ordinary_permissions(path: Path) -> None:
    """Give a temporary file the usual permissions (mkstemp makes 0600)."""
    if not path.exists():
        return
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(path, 0o666 & ~umask)


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


def write_text(path: str | Path, text: str) -> None:
    """Write a UTF-8 text file atomically."""
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8")


def write_with(path: str | Path, writer: Callable[[Path], None]) -> None:
    """Call ``writer(tmp_path)`` (e.g. a figure's savefig) and move the result into place."""
    with atomic_path(path) as tmp:
        writer(tmp)
