"""Which kind of file a path (or bundled name) holds: a plane-wave material file or a k·p
parameter file.

The two schemas (:mod:`bandpert.input.material`, :mod:`bandpert.input.kp_file`) share ``name``,
``source`` and a ``[lattice]`` table; they differ in what sets them apart here: a k·p file has a
``[parameters]`` table and ``lattice.structure``, a plane-wave file a ``[potential]`` table and
``lattice.type``. Commands use the kind to read the file with the right reader, or to say in one
line that they were given the other kind.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..data import find_material
from ..errors import InputError
from .reader import read_toml_document

__all__ = ["KIND_NAMES", "file_kind", "kind_of_document"]

#: The kinds, as a reader would name them.
KIND_NAMES: dict[str, str] = {"planewave": "plane-wave material file",
                              "kp": "k·p parameter file"}


def kind_of_document(doc: Any) -> str | None:
    """"kp", "planewave", or None when a parsed TOML document shows neither schema's marks."""
    if not isinstance(doc, dict):
        return None
    lattice = doc.get("lattice")
    lattice = lattice if isinstance(lattice, dict) else {}
    if "parameters" in doc or "structure" in lattice:
        return "kp"
    if "potential" in doc or "type" in lattice:
        return "planewave"
    return None


def file_kind(name_or_path: str | Path, prefer: str | None = None) -> str | None:
    """The kind of a material file, "planewave" or "kp" (None when it shows neither).

    Parameters
    ----------
    name_or_path : str or pathlib.Path
        A path, or a bundled name (:func:`bandpert.data.find_material`).
    prefer : str, optional
        Which bundled folder a bare name is looked up in first ("planewave" or "kp"); a name
        bundled only in the other folder is still found.

    Raises
    ------
    InputError
        If the file cannot be read or is not TOML.
    """
    try:
        path = find_material(name_or_path, prefer)
    except InputError:  # not bundled under the preferred kind: look in every folder
        path = find_material(name_or_path)
    return kind_of_document(read_toml_document(path, "a material or k·p parameter TOML file"))
