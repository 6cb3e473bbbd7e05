"""Bundled material files, installed with the package as package data.

``materials/planewave/<name>.toml`` are plane-wave material files (``bandpert bands``, ``gaps``,
``masses``, ``dos``, ``sweep``, ``fullzone``, ``check``); ``materials/kp/<name>.toml`` are k·p
parameter files (``bandpert kp``). Wherever a material file is read, a bundled name such as
``"silicon"`` works in place of a path; a path that exists always wins.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import InputError

#: Folder of the bundled material files.
MATERIALS_DIR = Path(__file__).resolve().parent / "materials"

#: Kinds of material file, each a subfolder of :data:`MATERIALS_DIR`.
KINDS = ("planewave", "kp")


def bundled_names(kind: str) -> list[str]:
    """Names of the bundled material files of one kind ("planewave" or "kp"), sorted."""
    return sorted(p.stem for p in (MATERIALS_DIR / kind).glob("*.toml"))


def find_material(name_or_path: str | Path, kind: str | None = None) -> Path:
    """The file a user means: an existing path as given, else the bundled file of that name.

    Parameters
    ----------
    name_or_path : str or pathlib.Path
        A path, or a bundled name (file stem, e.g. ``"silicon"``; ``"silicon.toml"`` works too).
    kind : str, optional
        "planewave" or "kp": where to look for a name; default both, plane-wave first.

    Returns
    -------
    pathlib.Path
        The path given when it exists or names a folder; the bundled file otherwise. A path
        that names no bundled file comes back unchanged, for the reader to report.

    Raises
    ------
    InputError
        A bare name (no folder, no ``.toml``) that is neither a file nor bundled: the message
        lists the bundled names.
    """
    path = Path(name_or_path)
    if path.exists():
        return path
    kinds = KINDS if kind is None else (kind,)
    if path.parent == Path(".") and path.suffix in ("", ".toml"):
        for k in kinds:
            candidate = MATERIALS_DIR / k / f"{path.stem}.toml"
            if candidate.is_file():
                return candidate
        if path.suffix == "":
            known = ", ".join(n for k in kinds for n in bundled_names(k))
            raise InputError(f"no such file and no bundled material of this name; expected a "
                             f"path or one of: {known}", str(name_or_path))
    return path
