"""The ``[lattice]`` table and the ``[[atoms]]`` of a plane-wave material file.

Part of the material reader (:mod:`bandpert.input.material`): lattice types and their primitive
vectors, the checks on lengths, handedness and periodic images, and the atoms of the basis.
Every problem is an :class:`~bandpert.errors.InputError` naming the file and the dotted key.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import InputError
from .key_ranges import (
    FRACTIONAL_COORDINATE,
    LATTICE_ANGLE_DEG,
    LATTICE_LENGTH_A,
    MIN_LATTICE_LENGTH_A,
    VECTOR_COMPONENT_A,
)
from .reader import TableReader, describe, entries, number_list

#: Lattice types by name, their dimension and the constants they take.
LATTICE_TYPES: dict[str, tuple[int, tuple[str, ...]]] = {
    "chain": (1, ("a_A",)),
    "square": (2, ("a_A",)),
    "rectangular": (2, ("a_A", "b_A")),
    "hexagonal-2d": (2, ("a_A",)),
    "oblique": (2, ("a_A", "b_A", "gamma_deg")),
    "sc": (3, ("a_A",)),
    "fcc": (3, ("a_A",)),
    "bcc": (3, ("a_A",)),
    "hexagonal": (3, ("a_A", "c_A")),
    "tetragonal": (3, ("a_A", "c_A")),
    "orthorhombic": (3, ("a_A", "b_A", "c_A")),
    "vectors": (0, ("vectors_A", "a_A")),
}

#: Closest allowed distance between two atoms, in Å (the shortest accepted lattice length too).
MIN_ATOM_DISTANCE_A = MIN_LATTICE_LENGTH_A


@dataclass(frozen=True)
class Atom:
    """One atom of the basis: species name and position in fractions of the lattice vectors."""

    species: str
    position_frac: tuple[float, ...]




def lattice_vectors(lattice_type: str, a: float, b: float | None = None, c: float | None = None,
                    gamma_deg: float | None = None) -> np.ndarray:
    """Primitive lattice vectors (rows, Å) of a named lattice.

    Parameters
    ----------
    lattice_type : str
        A key of :data:`LATTICE_TYPES` other than ``"vectors"``.
    a, b, c : float
        Lattice constants in Å (``a`` is the cubic edge for sc/fcc/bcc).
    gamma_deg : float, optional
        Angle between the two vectors of an oblique lattice.

    Returns
    -------
    numpy.ndarray
        Shape (d, d). fcc: a/2 (0,1,1), (1,0,1), (1,1,0); bcc: a/2 (−1,1,1), (1,−1,1), (1,1,−1);
        hexagonal: a(1,0,0), a(−1/2, √3/2, 0), c(0,0,1) (common practice, no source).
    """
    s3 = math.sqrt(3.0)
    table = {
        "chain": lambda: [[a]],
        "square": lambda: [[a, 0.0], [0.0, a]],
        "rectangular": lambda: [[a, 0.0], [0.0, b]],
        "hexagonal-2d": lambda: [[a, 0.0], [-a / 2, a * s3 / 2]],
        "oblique": lambda: [[a, 0.0], [b * math.cos(math.radians(gamma_deg)),
                                       b * math.sin(math.radians(gamma_deg))]],
        "sc": lambda: np.eye(3) * a,
        "fcc": lambda: np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]]) * (a / 2),
        "bcc": lambda: np.array([[-1, 1, 1], [1, -1, 1], [1, 1, -1]]) * (a / 2),
        "hexagonal": lambda: [[a, 0, 0], [-a / 2, a * s3 / 2, 0], [0, 0, c]],
        "tetragonal": lambda: [[a, 0, 0], [0, a, 0], [0, 0, c]],
        "orthorhombic": lambda: [[a, 0, 0], [0, b, 0], [0, 0, c]],
    }
    return np.array(table[lattice_type](), dtype=float)


def read_lattice(r: TableReader) -> tuple[str, int, np.ndarray, float]:
    kind = r.string("type", choices=tuple(LATTICE_TYPES))
    dim, keys = LATTICE_TYPES[kind]
    if kind == "vectors":
        raw = r.raw("vectors_A")
        if not isinstance(raw, list) or not raw or len(raw) > 3:
            got = entries(len(raw)) if isinstance(raw, list) else describe(raw)
            raise r.fail("vectors_A", "expected 1 to 3 lattice vectors, each an array of numbers, "
                                      f"got {got}")
        dim = len(raw)
        vectors = np.array([number_list(v, r, "vectors_A", length=dim) for v in raw])
        a = r.number("a_A", required=False, positive=True,
                     default=float(np.linalg.norm(vectors[0])))
        if not all(VECTOR_COMPONENT_A.contains(x) for x in vectors.ravel()):
            raise r.fail("vectors_A", f"a component of {np.max(np.abs(vectors)):g} Å is outside "
                                      f"the accepted range (at most {VECTOR_COMPONENT_A.hi:g} Å "
                                      "per component; a longer period leaves no resolved bands)")
        if not LATTICE_LENGTH_A.contains(a):
            _length_range(r, "a_A", a)
    else:
        consts = {k: r.number(k, positive=k != "gamma_deg") for k in keys}
        for k, value in consts.items():
            if k != "gamma_deg" and not LATTICE_LENGTH_A.contains(value):
                _length_range(r, k, value)
        if kind == "oblique" and not LATTICE_ANGLE_DEG.contains(consts["gamma_deg"]):
            raise r.fail("gamma_deg", f"must lie strictly between {LATTICE_ANGLE_DEG.lo:g} and "
                                      f"{LATTICE_ANGLE_DEG.hi:g}, got {consts['gamma_deg']:g}")
        a = consts["a_A"]
        vectors = lattice_vectors(kind, a, consts.get("b_A"), consts.get("c_A"),
                                  consts.get("gamma_deg"))
    # the key to blame: the vectors themselves, the angle, or the single lattice constant
    blame = {"vectors": "vectors_A", "oblique": "gamma_deg"}.get(kind, "a_A" if len(keys) == 1
                                                                 else "")
    with np.errstate(all="ignore"):
        lengths = np.linalg.norm(vectors, axis=1)
        det = float(np.linalg.det(vectors))
        scale = float(np.prod(lengths))
    if not (math.isfinite(det) and math.isfinite(scale)):
        raise r.fail(blame, "the cell volume overflows; expected lattice lengths in Å")
    if abs(det) < 1e-6 * scale or det == 0.0:
        raise r.fail(blame, "the lattice vectors are linearly dependent (zero cell volume); "
                            "expected independent vectors")
    if det < 0:
        raise r.fail("vectors_A", "the lattice vectors are left-handed (negative determinant); "
                                  "swap two vectors to make them right-handed")
    shortest = _shortest_translation(vectors)
    if shortest < MIN_ATOM_DISTANCE_A:
        raise r.fail(blame, f"the shortest lattice translation is {shortest:.3g} Å, so every atom "
                            f"would overlap its own periodic image; expected lengths in Å "
                            f"giving at least {MIN_ATOM_DISTANCE_A} Å")
    r.finish()
    vectors.setflags(write=False)
    return kind, dim, vectors, a


def _length_range(r: TableReader, key: str, value: float) -> None:
    why = ("a shorter one puts every atom on its own periodic image" if value < LATTICE_LENGTH_A.lo
           else "a longer period leaves no resolved bands")
    raise r.fail(key, f"{value:g} Å is outside the accepted range {LATTICE_LENGTH_A.lo:g} to "
                      f"{LATTICE_LENGTH_A.hi:g} Å ({why}; expected a lattice constant in Å)")


def _image_shifts(dim: int) -> np.ndarray:
    """Integer shifts {-1, 0, 1}^dim: the neighbouring cells searched for periodic images."""
    return np.array(list(itertools.product((-1, 0, 1), repeat=dim)), dtype=float)


def _shortest_translation(vectors: np.ndarray) -> float:
    """Length of the shortest non-zero lattice vector among the neighbouring-cell shifts (Å)."""
    shifts = _image_shifts(vectors.shape[0])
    shifts = shifts[np.any(shifts != 0, axis=1)]
    return float(np.min(np.linalg.norm(shifts @ vectors, axis=1)))


def read_atoms(raw: Any, source: str, dim: int, vectors: np.ndarray) -> tuple[Atom, ...]:
    if not isinstance(raw, list) or not raw:
        got = "an empty array" if isinstance(raw, list) else describe(raw)
        raise InputError("expected at least one [[atoms]] entry with species and position, got "
                         f"{got}", source, "atoms")
    atoms = []
    for i, entry in enumerate(raw):
        if not isinstance(entry, dict):
            raise InputError(f"expected a table, got {describe(entry)}", source, f"atoms[{i}]")
        r = TableReader(entry, source, f"atoms[{i}].")
        species = r.string("species")
        if not species.strip():
            raise r.fail("species", "must not be empty")
        pos = number_list(r.raw("position"), r, "position", length=dim)
        if not all(FRACTIONAL_COORDINATE.contains(x) for x in pos):
            raise r.fail("position", f"{list(pos)} is not a fractional position; expected "
                                     "fractions of the lattice vectors (usually between 0 and 1)")
        r.finish()
        atoms.append(Atom(species, pos))
    frac = np.array([a.position_frac for a in atoms])
    shifts = _image_shifts(dim)
    for i in range(len(atoms)):
        for j in range(i + 1, len(atoms)):
            d = frac[i] - frac[j]
            d -= np.round(d)
            # the nearest image of a skewed cell may sit one cell beyond the rounded one
            dist = float(np.min(np.linalg.norm((d + shifts) @ vectors, axis=1)))
            if dist < MIN_ATOM_DISTANCE_A:
                raise InputError(f"atoms {i} and {j} are {dist:.3g} Å apart (periodic images "
                                 f"included); expected at least {MIN_ATOM_DISTANCE_A} Å",
                                 source, f"atoms[{j}].position")
    return tuple(atoms)
