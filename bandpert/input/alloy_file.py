r"""Ternary alloys of two k·p parameter files: the bowing file and the alloy at a composition.

A bowing file names two end members (k·p parameter files, :mod:`bandpert.input.kp_file`) and
the bowing of the parameters that do not interpolate linearly. Every number P of the two files
becomes, at composition x (fraction of the second end member B),

    P(x) = (1 − x) P_A + x P_B − x (1 − x) C,   C = C0 + C1 x,

with C = 0 for a parameter the file does not bow (Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys.
89, 5815 (2001), Sec. III, the ternary interpolation; from memory). The alloy is then validated
as a k·p file of its own (:func:`~bandpert.input.kp_file.parse_kp_material`), so an alloy whose
parameters leave the accepted ranges is refused like a file would be.

Schema
------
::

    name = "Al(x)Ga(1-x)As"                     # required
    source = "Vurgaftman et al. 2001, ..."      # required: where the bowing comes from
    note = "..."                                # optional
    A = "gallium-arsenide"                      # required: the x = 0 end (k·p file or bundled
    B = "aluminium-arsenide"                    #   name; a relative path is read from the
                                                #   bowing file's folder); B is the x = 1 end

    [bowing.parameters]                         # optional tables mirroring the k·p file's
    Eg_eV = [-0.127, 1.310]                     # C = C0 + C1 x: a number or [C0, C1]
    [bowing.alignment]
    valence_band_eV = 0.0

    [valleys]                                   # optional: other conduction valleys, each
    X_eV = [1.981, 2.24, 0.055]                 # [E_A, E_B, C] from the valence-band top; a
                                                # warning when one lies below the Γ gap

Strings (name, source, note, a_v_convention once normalised) come from A; the ``[reference]``
masses of the ends are not interpolated (they are tabulated, not model parameters); the models
are those both ends support.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..data import MATERIALS_DIR, find_material
from ..errors import InputError
from .kp_file import A_V_CONVENTIONS, KPMaterial, parse_kp_material
from .reader import TableReader, describe, read_header, read_toml_document

__all__ = ["ALLOYS_DIR", "AlloyFile", "load_alloy", "parse_alloy"]

#: Folder of the bundled bowing files (``find_material(name, ALLOYS_KIND)``).
ALLOYS_KIND = "kp/alloys"
ALLOYS_DIR = MATERIALS_DIR / ALLOYS_KIND

#: Tables of a k·p file whose numbers a bowing file may bow.
BOWED_TABLES: tuple[str, ...] = ("lattice", "parameters", "deformation", "elastic", "alignment")


@dataclass(frozen=True, eq=False)
class AlloyFile:
    """A validated bowing file with its two end members (as parsed documents).

    Attributes
    ----------
    name, source, note, file : str
    end_a, end_b : dict
        The end members' documents (a_v in the convention kept, ``[reference]`` dropped).
    end_files : tuple of str
        Their paths.
    bowing : dict
        Table → key → (C0, C1).
    valleys : dict
        Valley name → (E_A, E_B, C) in eV from the valence-band top.
    """

    name: str
    source: str
    note: str
    file: str
    end_a: dict[str, Any]
    end_b: dict[str, Any]
    end_files: tuple[str, str]
    bowing: dict[str, dict[str, tuple[float, float]]]
    valleys: dict[str, tuple[float, float, float]]

    def document(self, x: float) -> dict[str, Any]:
        """The alloy's k·p document at composition x (module docstring)."""
        if not (math.isfinite(x) and 0.0 <= x <= 1.0):
            raise InputError(f"composition x = {x} is outside 0 to 1", self.file, "x")
        doc = copy.deepcopy(self.end_a)
        for table in BOWED_TABLES:
            if table not in self.end_a or table not in self.end_b:
                doc.pop(table, None)
                continue
            for key, va in self.end_a[table].items():
                vb = self.end_b[table].get(key)
                if isinstance(va, bool) or not isinstance(va, int | float):
                    continue
                if isinstance(vb, bool) or not isinstance(vb, int | float):
                    raise InputError(f"'{key}' of table [{table}] is a number in "
                                     f"{self.end_files[0]} but not in {self.end_files[1]}; "
                                     "expected both ends to give it", self.file, "B")
                c0, c1 = self.bowing.get(table, {}).get(key, (0.0, 0.0))
                doc[table][key] = (1 - x) * va + x * vb - x * (1 - x) * (c0 + c1 * x)
        models = [m for m in self.end_a.get("models", []) if m in self.end_b.get("models", [])]
        if models:
            doc["models"] = models
        doc["name"] = f"{self.name}, x = {x:g}"
        doc["source"] = f"{self.source}; ends: {self.end_a['source']} | {self.end_b['source']}"
        return doc

    def at(self, x: float) -> KPMaterial:
        """The alloy at composition x as a validated :class:`KPMaterial`."""
        return parse_kp_material(self.document(x), f"{self.file} at x = {x:g}")

    def valley_note(self, x: float) -> str:
        """A warning text when a listed valley lies below the Γ gap at x ("" otherwise)."""
        gamma = self.at(x).parameters.Eg_eV
        low = []
        for valley, (ea, eb, c) in self.valleys.items():
            e = (1 - x) * ea + x * eb - x * (1 - x) * c
            if gamma is not None and e < gamma:
                low.append(f"{valley.removesuffix('_eV')} at {e:.3f} eV")
        if not low:
            return ""
        return (f"{self.name} at x = {x:g}: the lowest conduction valley is not Γ "
                f"(Eg(Γ) = {gamma:.3f} eV; {', '.join(low)}); a Γ-only k·p model is out of its "
                "depth for the conduction band there")


def local_or_bundled(name: str, folder: Path, kind: str) -> Path:
    """``folder/name`` when that file exists, else the bundled file of that name and kind
    (:func:`bandpert.data.find_material`).

    Raises
    ------
    InputError
        A name the operating system cannot even look up (too long, a NUL byte), or a bare name
        that is neither a file nor bundled.
    """
    try:
        candidate = folder / name
        return candidate if candidate.is_file() else find_material(name, kind)
    except (OSError, ValueError) as exc:
        reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
        raise InputError(f"'{name}' cannot be looked up ({reason}); expected a file name or a "
                         "bundled name") from None


def _end_document(r: TableReader, key: str, folder: Path) -> tuple[dict[str, Any], str]:
    name = r.string(key)
    try:
        path = local_or_bundled(name, folder, "kp")
        doc = read_toml_document(path, "a k·p parameter TOML file")
        parse_kp_material(doc, str(path))  # each end valid on its own
    except InputError as exc:
        raise r.fail(key, f"'{name}' cannot be used: {exc.one_line()}") from None
    doc = copy.deepcopy(doc)
    doc.pop("reference", None)
    dp = doc.get("deformation")
    if isinstance(dp, dict) and dp.get("a_v_convention") == A_V_CONVENTIONS[1]:
        dp["a_v_eV"] = -dp["a_v_eV"]
        dp["a_v_convention"] = A_V_CONVENTIONS[0]
    return doc, str(path)


def _bow(value: Any, r: TableReader, key: str) -> tuple[float, float]:
    if isinstance(value, list) and len(value) == 2:
        parts = value
    elif isinstance(value, bool) or not isinstance(value, int | float | list):
        raise r.fail(key, f"expected a bowing C (eV or the parameter's unit) or [C0, C1] for "
                          f"C = C0 + C1·x, got {describe(value)}")
    else:
        parts = [value, 0.0] if not isinstance(value, list) else None
    if parts is None or any(isinstance(v, bool) or not isinstance(v, int | float)
                            or not math.isfinite(v) for v in parts):
        raise r.fail(key, "expected a finite number or two numbers [C0, C1]")
    return float(parts[0]), float(parts[1])


def parse_alloy(doc: dict[str, Any], source: str = "", folder: Path | None = None) -> AlloyFile:
    """Validate a parsed bowing document (module docstring) into an :class:`AlloyFile`."""
    r, name, src, note = read_header(doc, source)
    folder = folder if folder is not None else Path(source).parent
    end_a, file_a = _end_document(r, "A", folder)
    end_b, file_b = _end_document(r, "B", folder)
    bowing: dict[str, dict[str, tuple[float, float]]] = {}
    bow = r.sub("bowing", required=False)
    if bow is not None:
        for table in list(bow.table):
            if table not in BOWED_TABLES:
                raise bow.fail(table, f"unknown table (allowed here: {', '.join(BOWED_TABLES)})")
            t = bow.sub(table)
            for key in list(t.table):
                numeric = isinstance(end_a.get(table, {}).get(key), int | float)
                if not numeric:
                    raise t.fail(key, f"is not a number of the end member's [{table}] table; "
                                      "expected one of its keys")
                bowing.setdefault(table, {})[key] = _bow(t.raw(key), t, key)
            t.finish()
        bow.finish()
    valleys: dict[str, tuple[float, float, float]] = {}
    val = r.sub("valleys", required=False)
    if val is not None:
        for key in list(val.table):
            raw = val.raw(key)
            if not (isinstance(raw, list) and len(raw) == 3 and all(
                    isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v)
                    for v in raw)):
                raise val.fail(key, f"expected [E_A, E_B, C] in eV, got {describe(raw)}")
            valleys[key] = tuple(float(v) for v in raw)
        val.finish()
    r.finish()
    return AlloyFile(name, src, note, source, end_a, end_b, (file_a, file_b), bowing, valleys)


def load_alloy(path: str | Path) -> AlloyFile:
    """Read and validate a bowing file (a path, or a bundled name such as ``"al-ga-as"``)."""
    path = find_material(path, ALLOYS_KIND)
    return parse_alloy(read_toml_document(path, "a bowing TOML file"), str(path), path.parent)
