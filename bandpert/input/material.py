"""Material description files: TOML in, a validated, frozen :class:`Material` out.

The schema is documented in the README ("Material files"). Every problem is reported as an
:class:`~bandpert.errors.InputError` naming the file, the dotted key, what is wrong and what was
expected. Unknown keys are refused so that a misspelt key never silently does nothing.

Conventions (see CONVENTIONS.md): lengths in Å, energies converted once to eV here; form-factor
shells |G|² are given in units of (2π/a)², with ``a`` the lattice constant ``lattice.a_A``; the
"continuous" form takes wave vectors in Å⁻¹ (see :mod:`bandpert.formfactor`).

The tables have their own readers: ``[lattice]`` and ``[[atoms]]`` in :mod:`.lattice_input`,
``[potential]`` in :mod:`.potential_input`, ``[spin_orbit]`` in :mod:`.spin_orbit`; this module
reads the rest (path, basis, electrons) and assembles the :class:`Material`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..data import find_material
from ..units import ENERGY_UNITS_TO_EV
from .key_ranges import CUTOFF_EV, CUTOFF_RY, FRACTIONAL_COORDINATE, MAX_CUTOFF_EV
from .lattice_input import (
    LATTICE_TYPES,
    Atom,
    lattice_vectors,
    read_atoms,
    read_lattice,
)
from .nonlocal_input import Nonlocal, read_nonlocal
from .potential_input import (
    CONTINUOUS_PARAMETERS,
    POTENTIAL_FORMS,
    REFERENCE_MEASURE_KEYS,
    Potential,
    convert_to_ev,
    kinetic_scale_eV,
    read_potential,
)
from .reader import (
    TableReader,
    describe,
    entries,
    number_list,
    read_header,
    read_toml_document,
    show_list,
)
from .spin_orbit import SpinOrbit, read_spin_orbit

#: Names other modules import from here (the lattice, atoms and potential readers live in
#: :mod:`.lattice_input` and :mod:`.potential_input`).
__all__ = [
    "CONTINUOUS_PARAMETERS",
    "GAMMA_ALIASES",
    "LATTICE_TYPES",
    "MAX_BANDS",
    "MAX_CUTOFF_EV",
    "POTENTIAL_FORMS",
    "REFERENCE_MEASURE_KEYS",
    "Atom",
    "CustomPath",
    "Material",
    "Potential",
    "canonical_label",
    "kinetic_scale_eV",
    "lattice_vectors",
    "load_material",
    "parse_material",
    "read_toml_document",
]

#: Labels accepted on input for Γ.
GAMMA_ALIASES = {"G": "Γ", "Gamma": "Γ", "GAMMA": "Γ", "Γ": "Γ"}

#: Largest number of bands, and of plane waves (the plane-wave model's own limit,
#: ``bandpert.planewave.model.MAX_BASIS``: a 4000 × 4000 complex matrix is 256 MB).
MAX_BANDS = 4000



def canonical_label(label: str) -> str:
    """Return the label as stored (``G``/``Gamma`` become ``Γ``)."""
    return GAMMA_ALIASES.get(label, label)




@dataclass(frozen=True)
class CustomPath:
    """A user-given k-path: labelled points (fractional reciprocal coordinates) and legs."""

    points_frac: dict[str, tuple[float, ...]]
    legs: tuple[tuple[str, ...], ...]




@dataclass(frozen=True)
class Material:
    """A validated material description.

    Attributes
    ----------
    name, source, note : str
        Human description; ``source`` cites where the parameters come from.
    file : str
        The file it was read from ("" when built in code).
    lattice_type : str
        One of :data:`LATTICE_TYPES`.
    dimension : int
        1, 2 or 3.
    vectors_A : numpy.ndarray
        Primitive lattice vectors as rows, shape (dimension, dimension), in Å.
    a_A : float
        The lattice constant ``a`` in Å (the unit of the form-factor shells).
    atoms : tuple of Atom
        The basis.
    potential : Potential
        The crystal potential.
    cutoff_eV : float or None
        Plane-wave kinetic-energy cutoff; None means "choose a converged one".
    valence_electrons : int or None
        Electrons per primitive cell (sets the energy zero); None keeps absolute energies.
    n_bands : int or None
        Default number of bands to compute.
    path : CustomPath or None
        A custom k-path; None means the standard path of the lattice.
    spin_orbit : SpinOrbit or None
        Spin–orbit parameters per species (:mod:`bandpert.input.spin_orbit`); None for the
        spinless model.
    nonlocal_terms : Nonlocal or None
        Square-well l = 0, 2 nonlocal terms per species (:mod:`bandpert.input.nonlocal_input`);
        None for a local potential.
    """

    name: str
    source: str
    note: str
    file: str
    lattice_type: str
    dimension: int
    vectors_A: np.ndarray
    a_A: float
    atoms: tuple[Atom, ...]
    potential: Potential
    cutoff_eV: float | None = None
    valence_electrons: int | None = None
    n_bands: int | None = None
    path: CustomPath | None = None
    spin_orbit: SpinOrbit | None = None
    nonlocal_terms: Nonlocal | None = None

    @property
    def volume_A(self) -> float:
        """Cell volume (Å³), area (Å²) or length (Å) of the primitive cell."""
        return float(abs(np.linalg.det(self.vectors_A)))

    @property
    def positions_cart_A(self) -> np.ndarray:
        """(n_atoms, d) Cartesian positions of the atoms (Å)."""
        return np.array([a.position_frac for a in self.atoms], dtype=float) @ self.vectors_A

    @property
    def electrons_per_band(self) -> int:
        """2 for spinless bands, 1 for spinor bands (with spin–orbit)."""
        return 2 if self.spin_orbit is None else 1

    def without_spin_orbit(self) -> Material:
        """The same material without its spin–orbit term (the spinless model)."""
        return replace(self, spin_orbit=None)

    def local_spinless(self) -> Material:
        """The same material without spin–orbit and nonlocal terms: V(G) alone."""
        return replace(self, spin_orbit=None, nonlocal_terms=None)


def _read_path(r: TableReader, dim: int) -> CustomPath:
    pts_r = r.sub("points")
    points: dict[str, tuple[float, ...]] = {}
    given: dict[str, str] = {}
    for label in list(pts_r.table):
        name = canonical_label(label)
        if not label.strip() or "|" in label:
            raise pts_r.fail(label, "expected a non-empty label without '|' (the plot uses "
                                    "'|' to join the labels at a jump)")
        if name in points:
            raise pts_r.fail(label, f"'{label}' and '{given[name]}' both name the point {name}; "
                                    "expected each point once")
        points[name] = number_list(pts_r.raw(label), pts_r, label, length=dim)
        if not all(FRACTIONAL_COORDINATE.contains(x) for x in points[name]):
            raise pts_r.fail(label, f"{show_list(list(points[name]))} is outside the accepted "
                                    f"range (magnitude at most {FRACTIONAL_COORDINATE.hi:g}); "
                                    "expected fractions of the reciprocal vectors")
        given[name] = label
    pts_r.finish()
    raw = r.raw("legs")
    if not isinstance(raw, list) or not raw:
        got = "an empty array" if isinstance(raw, list) else describe(raw)
        raise r.fail("legs", "expected an array of legs, each an array of at least two labels, "
                             f"got {got}")
    legs = []
    for i, leg in enumerate(raw):
        key = f"legs[{i}]"
        if not isinstance(leg, list) or len(leg) < 2 or not all(isinstance(x, str) for x in leg):
            got = (entries(len(leg)) if isinstance(leg, list) and len(leg) < 2
                   else show_list(leg) if isinstance(leg, list) else describe(leg))
            raise r.fail(key, f"expected an array of at least two labels, got {got}")
        leg = [canonical_label(x) for x in leg]
        for label in leg:
            if label not in points:
                raise r.fail(key, f"label '{label}' is not among path.points "
                                  f"({', '.join(points) or 'none given'})")
        for x, y in zip(leg, leg[1:], strict=False):
            if x == y:
                raise r.fail(key, f"repeats '{x}' twice in a row (a zero-length step); expected "
                                  "consecutive labels to differ")
        legs.append(tuple(leg))
    r.finish()
    return CustomPath(points, tuple(legs))


def parse_material(doc: dict[str, Any], source: str = "") -> Material:
    """Validate a parsed material document (the TOML tables) into a :class:`Material`.

    Parameters
    ----------
    doc : dict
        The parsed TOML document.
    source : str
        Name of the file, used in error messages.

    Returns
    -------
    Material

    Raises
    ------
    InputError
        On any missing, unknown, mistyped or non-physical value.
    """
    r, name, src, note = read_header(doc, source)
    lat = r.sub("lattice")
    kind, dim, vectors, a = read_lattice(lat)
    atoms = read_atoms(r.raw("atoms"), source, dim, vectors)
    measure = abs(float(np.linalg.det(vectors))) / len(atoms)
    pot = read_potential(r.sub("potential"), atoms, dim, a, measure)
    cutoff = None
    basis = r.sub("basis", required=False)
    n_bands = None
    if basis is not None:
        why = "beyond any basis of at most 4000 plane waves"
        c_ev = basis.number("cutoff_eV", required=False, positive=True,
                            bounds=CUTOFF_EV.closed, meaning=why)
        c_ry = basis.number("cutoff_Ry", required=False, positive=True,
                            bounds=CUTOFF_RY.closed, meaning=why)
        if c_ev is not None and c_ry is not None:
            raise basis.fail("cutoff_Ry", "give either cutoff_eV or cutoff_Ry, not both")
        cutoff = c_ev if c_ev is not None else (
            None if c_ry is None else convert_to_ev(c_ry, ENERGY_UNITS_TO_EV["Ry"], basis,
                                             "cutoff_Ry").real)
        n_bands = basis.integer("bands", required=False, minimum=1, maximum=MAX_BANDS,
                                meaning="the largest plane-wave basis the tool builds")
        basis.finish()
    electrons = None
    el = r.sub("electrons", required=False)
    if el is not None:
        electrons = el.integer("valence", minimum=1, maximum=2 * MAX_BANDS,
                               meaning=f"two per band of the largest basis, {MAX_BANDS} "
                                       "plane waves")
        el.finish()
    path_r = r.sub("path", required=False)
    path = _read_path(path_r, dim) if path_r is not None else None
    so_r = r.sub("spin_orbit", required=False)
    spin_orbit = (None if so_r is None
                  else read_spin_orbit(so_r, {a.species for a in atoms}, dim))
    nl_r = r.sub("nonlocal", required=False)
    nonlocal_terms = (None if nl_r is None
                      else read_nonlocal(nl_r, {a.species for a in atoms}, dim))
    r.finish()
    return Material(name=name, source=src, note=note, file=source, lattice_type=kind,
                    dimension=dim, vectors_A=vectors, a_A=a, atoms=atoms, potential=pot,
                    cutoff_eV=cutoff, valence_electrons=electrons, n_bands=n_bands, path=path,
                    spin_orbit=spin_orbit, nonlocal_terms=nonlocal_terms)


def load_material(path: str | Path) -> Material:
    """Read and validate a material file.

    Parameters
    ----------
    path : str or pathlib.Path
        A TOML file in the bandpert material schema (README, "Material files"), or the
        name of a bundled one (``"silicon"``, :func:`bandpert.data.find_material`).

    Returns
    -------
    Material

    Raises
    ------
    InputError
        If the file cannot be read, is not TOML, or fails validation.
    """
    path = find_material(path, "planewave")
    return parse_material(read_toml_document(path), str(path))
