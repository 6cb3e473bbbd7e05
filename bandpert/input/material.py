"""Material description files: TOML in, a validated, frozen :class:`Material` out.

The schema is documented in the README ("Material files"). Every problem is reported as an
:class:`~bandpert.errors.InputError` naming the file, the dotted key, what is wrong and what was
expected. Unknown keys are refused so that a misspelt key never silently does nothing.

Conventions (see CONVENTIONS.md): lengths in Å, energies converted once to eV here; form-factor
shells |G|² are given in units of (2π/a)², with ``a`` the lattice constant ``lattice.a_A``; the
"continuous" form takes wave vectors in Å⁻¹ (see :mod:`bandpert.formfactor`).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..data import find_material
from ..errors import InputError
from ..units import ENERGY_UNITS_TO_EV, HBAR2_OVER_2M0_EV_A2
from .reader import (
    TableReader,
    describe,
    entries,
    number,
    number_list,
    read_header,
    read_toml_document,
    show_complex,
    show_list,
)
from .spin_orbit import SpinOrbit, read_spin_orbit

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

#: Forms of the crystal potential.
POTENTIAL_FORMS = ("empty", "symmetric-antisymmetric", "per-species", "fourier", "continuous")

#: Parameters of one species in the "continuous" form, in file order (a1 in the file's energy
#: unit, a2 in Å⁻², a3 dimensionless, a4 in Å²).
CONTINUOUS_PARAMETERS = ("a1", "a2_invA2", "a3", "a4_A2")

#: Key of the reference atomic volume Ω0 of the "continuous" form, by lattice dimension
#: (the cell's length, area or volume per atom).
REFERENCE_MEASURE_KEYS = {1: "reference_length_A", 2: "reference_area_A2",
                          3: "reference_volume_A3"}

#: Labels accepted on input for Γ.
GAMMA_ALIASES = {"G": "Γ", "Gamma": "Γ", "GAMMA": "Γ", "Γ": "Γ"}

#: Closest allowed distance between two atoms, in Å.
MIN_ATOM_DISTANCE_A = 0.3

#: Largest accepted magnitude of a fractional atomic coordinate (guards the arithmetic only).
MAX_FRACTIONAL_COORDINATE = 1000.0

#: Largest accepted magnitude of a Miller index of an explicit Fourier coefficient. Far beyond
#: any basis the plane-wave model allows, and small enough for its integer index arithmetic.
MAX_MILLER_INDEX = 100_000

#: Longest accepted lattice length (lattice constants and vector lengths), Å. A longer period
#: puts the first reciprocal shell below 4e-6 eV: every band energy would be a numerical
#: rounding of the free-electron continuum.
MAX_LATTICE_LENGTH_A = 1000.0

#: Largest accepted |V| of a Fourier coefficient or form factor, as a multiple of the kinetic
#: scale ħ²(2π/a)²/2m0 (silicon's strongest form factor is 0.56 of it). A stronger potential
#: binds states on a length scale no plane-wave basis of at most :data:`MAX_BANDS` waves
#: resolves; its bands would be numbers without meaning.
MAX_POTENTIAL_RATIO = 100.0

#: Largest number of bands, and of plane waves (the plane-wave model's own limit,
#: ``bandpert.planewave.model.MAX_BASIS``: a 4000 × 4000 complex matrix is 256 MB).
MAX_BANDS = 4000

#: Largest accepted plane-wave cutoff, eV (7350 Ry): beyond any basis the tool builds.
MAX_CUTOFF_EV = 1.0e5

#: Largest |G|² of a listed form-factor shell, in (2π/a)²: far beyond any basis the tool builds.
MAX_SHELL_G2 = 1.0e4

#: Relative tolerance under which two |G|² shells count as the same shell.
SHELL_MATCH_TOLERANCE = 1e-6


def canonical_label(label: str) -> str:
    """Return the label as stored (``G``/``Gamma`` become ``Γ``)."""
    return GAMMA_ALIASES.get(label, label)


@dataclass(frozen=True)
class Atom:
    """One atom of the basis: species name and position in fractions of the lattice vectors."""

    species: str
    position_frac: tuple[float, ...]


@dataclass(frozen=True)
class Potential:
    """The crystal potential as read from the file, energies already in eV.

    Attributes
    ----------
    form : str
        One of :data:`POTENTIAL_FORMS`.
    shells_g2 : tuple of float
        |G|² of each shell in units of (2π/a)² (form-factor forms only).
    symmetric_eV, antisymmetric_eV : tuple of float
        V_S and V_A on each shell ("symmetric-antisymmetric" form).
    species_eV : dict
        Per-species form factors v_j on each shell ("per-species" form).
    miller : tuple of tuple of int
        Miller indices of explicit Fourier coefficients ("fourier" form).
    fourier_eV : tuple of complex
        V(G) for each Miller index, completed so that V(−G) = V(G)*.
    continuous : dict
        "continuous" form: species → (a1 in eV, a2 in Å⁻², a3, a4 in Å²) of
        v(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1)
        (:func:`bandpert.formfactor.continuous_form_factor`).
    reference_volume_A : float or None
        "continuous" form: Ω0, the cell measure per atom at which the parameters hold, in Å³
        (Å² for a 2D lattice, Å for a 1D lattice).
    taper_invA : tuple of float or None
        "continuous" form: (q1, q2) in Å⁻¹ of the smooth switch from 1 to 0 multiplying v, or None
        for no taper.
    file_unit : str
        The energy unit the file used ("eV" or "Ry").
    """

    form: str
    file_unit: str = "eV"
    shells_g2: tuple[float, ...] = ()
    symmetric_eV: tuple[float, ...] = ()
    antisymmetric_eV: tuple[float, ...] = ()
    species_eV: dict[str, tuple[float, ...]] = field(default_factory=dict)
    miller: tuple[tuple[int, ...], ...] = ()
    fourier_eV: tuple[complex, ...] = ()
    continuous: dict[str, tuple[float, float, float, float]] = field(default_factory=dict)
    reference_volume_A: float | None = None
    taper_invA: tuple[float, float] | None = None


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

    @property
    def volume_A(self) -> float:
        """Cell volume (Å³), area (Å²) or length (Å) of the primitive cell."""
        return float(abs(np.linalg.det(self.vectors_A)))

    @property
    def electrons_per_band(self) -> int:
        """2 for spinless bands, 1 for spinor bands (with spin–orbit)."""
        return 2 if self.spin_orbit is None else 1

    def without_spin_orbit(self) -> Material:
        """The same material without its spin–orbit term (the spinless model)."""
        return replace(self, spin_orbit=None)


def _to_ev(value: complex, to_ev: float, reader: TableReader, name: str) -> complex:
    """Convert an energy to eV, refusing a value that overflows on the way."""
    z = complex(value) * to_ev
    if not (math.isfinite(z.real) and math.isfinite(z.imag)):
        raise reader.fail(name, f"{show_complex(complex(value))} is too large to convert to eV; "
                                "expected a finite energy")
    return z


def _energies_ev(values: tuple[float, ...], to_ev: float, reader: TableReader,
                 name: str) -> tuple[float, ...]:
    return tuple(_to_ev(v, to_ev, reader, name).real for v in values)


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


def _read_lattice(r: TableReader) -> tuple[str, int, np.ndarray, float]:
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
        if np.max(np.abs(vectors)) > MAX_LATTICE_LENGTH_A:
            raise r.fail("vectors_A", f"a component of {np.max(np.abs(vectors)):g} Å is outside "
                                      f"the accepted range (at most {MAX_LATTICE_LENGTH_A:g} Å "
                                      "per component; a longer period leaves no resolved bands)")
        if a > MAX_LATTICE_LENGTH_A:
            _length_range(r, "a_A", a)
    else:
        consts = {k: r.number(k, positive=k != "gamma_deg") for k in keys}
        for k, value in consts.items():
            if k != "gamma_deg" and value > MAX_LATTICE_LENGTH_A:
                _length_range(r, k, value)
        if kind == "oblique" and not 0.0 < consts["gamma_deg"] < 180.0:
            raise r.fail("gamma_deg", "must lie strictly between 0 and 180, got "
                                      f"{consts['gamma_deg']:g}")
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
    raise r.fail(key, f"{value:g} Å is outside the accepted range 0.3 to {MAX_LATTICE_LENGTH_A:g} "
                      "Å (a longer period leaves no resolved bands; expected a lattice "
                      "constant in Å)")


def kinetic_scale_eV(a_A: float) -> float:
    """The kinetic scale ħ²(2π/a)²/2m0 of a lattice constant ``a`` (Å), in eV.

    It is the free-electron energy of the first reciprocal shell of a simple cubic lattice of
    edge ``a``, the natural unit of the form factors (5.10 eV for silicon's a = 5.43 Å).
    """
    return HBAR2_OVER_2M0_EV_A2 * (2.0 * math.pi / a_A) ** 2


def _check_strength(r: TableReader, key: str, values_eV, a_A: float, what: str = "|V|") -> None:
    """Refuse a potential stronger than :data:`MAX_POTENTIAL_RATIO` × the kinetic scale."""
    largest = max((abs(complex(v)) for v in values_eV), default=0.0)
    scale = kinetic_scale_eV(a_A)
    if largest > MAX_POTENTIAL_RATIO * scale:
        raise r.fail(key, f"{what} = {largest:.4g} eV is {largest / scale:.3g} times the kinetic "
                          f"scale ħ²(2π/a)²/2m0 = {scale:.4g} eV; expected at most "
                          f"{MAX_POTENTIAL_RATIO:g} times (a potential that strong needs a basis "
                          "no plane-wave model holds)")


def _image_shifts(dim: int) -> np.ndarray:
    """Integer shifts {-1, 0, 1}^dim: the neighbouring cells searched for periodic images."""
    return np.array(list(itertools.product((-1, 0, 1), repeat=dim)), dtype=float)


def _shortest_translation(vectors: np.ndarray) -> float:
    """Length of the shortest non-zero lattice vector among the neighbouring-cell shifts (Å)."""
    shifts = _image_shifts(vectors.shape[0])
    shifts = shifts[np.any(shifts != 0, axis=1)]
    return float(np.min(np.linalg.norm(shifts @ vectors, axis=1)))


def _read_atoms(raw: Any, source: str, dim: int, vectors: np.ndarray) -> tuple[Atom, ...]:
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
        if any(abs(x) > MAX_FRACTIONAL_COORDINATE for x in pos):
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


def _read_potential(r: TableReader, atoms: tuple[Atom, ...], dim: int, a_A: float,
                    atom_measure: float) -> Potential:
    form = r.string("form", choices=POTENTIAL_FORMS)
    if form == "empty":
        r.finish()
        return Potential(form="empty")
    unit = r.string("unit", choices=tuple(ENERGY_UNITS_TO_EV))
    to_ev = ENERGY_UNITS_TO_EV[unit]
    if form == "fourier":
        raw = r.raw("coefficients")
        if not isinstance(raw, list) or not raw:
            raise r.fail("coefficients",
                         "expected an array of {miller = [...], value = ...} tables")
        coeffs: dict[tuple[int, ...], complex] = {}
        where: dict[tuple[int, ...], int] = {}
        for i, entry in enumerate(raw):
            key = f"coefficients[{i}]"
            if not isinstance(entry, dict):
                raise r.fail(key, f"expected a table, got {describe(entry)}")
            e = TableReader(entry, r.source, f"{r.key(key)}.")
            miller = e.raw("miller")
            if (not isinstance(miller, list) or len(miller) != dim
                    or any(isinstance(m, bool) or not isinstance(m, int) for m in miller)):
                got = (f"{entries(len(miller))} {show_list(miller)}"
                       if isinstance(miller, list) else describe(miller))
                raise e.fail("miller", f"expected {dim} integers (a Miller index of this "
                                       f"{dim}D lattice), got {got}")
            if any(abs(m) > MAX_MILLER_INDEX for m in miller):
                raise e.fail("miller", f"{show_list(miller)} is far outside any plane-wave "
                                       "basis; expected integers of magnitude at most "
                                       f"{MAX_MILLER_INDEX}")
            value = e.raw("value")
            if isinstance(value, list):
                re_im = number_list(value, e, "value", length=2)
                z = _to_ev(complex(re_im[0], re_im[1]), to_ev, e, "value")
            else:
                z = _to_ev(number(value, e, "value"), to_ev, e, "value")
            e.finish()
            m = tuple(miller)
            if m in coeffs:
                raise e.fail("miller", f"{list(m)} is listed twice (first in "
                                       f"coefficients[{where[m]}]); expected each G once")
            if all(x == 0 for x in m) and abs(z.imag) > 1e-12 * max(1.0, abs(z)):
                raise e.fail("value", "V(0) must be real (the average potential); expected a "
                                      "real number")
            coeffs[m] = z
            where[m] = i
        for m, z in list(coeffs.items()):
            minus = tuple(-x for x in m)
            if minus in coeffs:
                if abs(coeffs[minus] - z.conjugate()) > 1e-9 * max(1.0, abs(z)):
                    later = max(where[m], where[minus])
                    raise r.fail(f"coefficients[{later}]",
                                 f"V({list(minus)}) = {show_complex(coeffs[minus] / to_ev)} "
                                 f"is not the complex conjugate of V({list(m)}) = "
                                 f"{show_complex(z / to_ev)}; a real potential needs V(-G) = V(G)* "
                                 "(give one of the two and the loader completes the other)")
            else:
                coeffs[minus] = z.conjugate()
        r.finish()
        keys = sorted(coeffs)
        _check_strength(r, "coefficients", coeffs.values(), a_A)
        return Potential(form=form, file_unit=unit, miller=tuple(keys),
                         fourier_eV=tuple(coeffs[k] for k in keys))
    if form == "continuous":
        return _read_continuous(r, atoms, dim, unit, to_ev, a_A, atom_measure)
    shells = number_list(r.raw("shells"), r, "shells")
    if not shells:
        raise r.fail("shells", "expected at least one |G|² shell")
    if any(not 0 <= s <= MAX_SHELL_G2 for s in shells):
        raise r.fail("shells", f"{list(shells)} has a |G|² outside the accepted range "
                               f"0 to {MAX_SHELL_G2:g}; expected non-negative values in units "
                               "of (2π/a)²")
    ordered = sorted(shells)
    for lo, hi in zip(ordered, ordered[1:], strict=False):
        if hi - lo <= SHELL_MATCH_TOLERANCE * max(hi, 1.0):
            same = (f"|G|² = {hi:g} is listed twice" if hi == lo else
                    f"|G|² = {lo:.12g} and {hi:.12g} match within the shell tolerance")
            raise r.fail("shells", f"{same}; expected distinct shells")
    n = len(shells)
    if form == "symmetric-antisymmetric":
        if len(atoms) != 2:
            raise r.fail("form", "the symmetric-antisymmetric form needs exactly 2 atoms, the "
                                 f"file has {len(atoms)}; use form = \"per-species\"")
        sym = number_list(r.raw("symmetric"), r, "symmetric", length=n)
        anti = r.raw("antisymmetric", required=False)
        anti = (0.0,) * n if anti is None else number_list(anti, r, "antisymmetric", length=n)
        r.finish()
        sym_ev = _energies_ev(sym, to_ev, r, "symmetric")
        anti_ev = _energies_ev(anti, to_ev, r, "antisymmetric")
        _check_strength(r, "symmetric", sym_ev, a_A)
        _check_strength(r, "antisymmetric", anti_ev, a_A)
        return Potential(form=form, file_unit=unit, shells_g2=shells,
                         symmetric_eV=sym_ev, antisymmetric_eV=anti_ev)
    species_r = r.sub("species")
    needed = {a.species for a in atoms}
    values: dict[str, tuple[float, ...]] = {}
    for name in sorted(needed):
        if not species_r.has(name):
            raise species_r.fail(name, f"missing form factors for species '{name}' (atoms list it)")
        factors = number_list(species_r.raw(name), species_r, name, length=n)
        values[name] = _energies_ev(factors, to_ev, species_r, name)
        _check_strength(species_r, name, values[name], a_A)
    species_r.finish()
    r.finish()
    return Potential(form=form, file_unit=unit, shells_g2=shells, species_eV=values)


def _read_continuous(r: TableReader, atoms: tuple[Atom, ...], dim: int, unit: str,
                     to_ev: float, a_A: float, atom_measure: float) -> Potential:
    """The "continuous" form: per-species parameters of v(q), Ω0 and an optional taper.

    v(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1) (Friedel, Hybertsen & Schlüter, Phys. Rev. B 39,
    7974 (1989); the form from memory). Its denominator is positive for every q ≥ 0 exactly when
    a3 > 1 and a4 ≥ 0 (it grows from a3 − 1 with q² when a4 > 0); a4 > 0 is required as well so
    that v decays at large q. For a3 ≤ 1 the denominator vanishes at q² = −ln(a3)/a4 or is
    negative everywhere, which either makes v infinite or makes it grow like q².
    """
    measure_key = REFERENCE_MEASURE_KEYS[dim]
    omega0 = r.number(measure_key, positive=True)
    taper = r.raw("taper_invA", required=False)
    if taper is not None:
        taper = number_list(taper, r, "taper_invA", length=2)
        if taper[0] < 0:
            raise r.fail("taper_invA", f"q1 = {taper[0]:g} Å⁻¹ is negative; expected "
                                       "0 <= q1 < q2 (Å⁻¹)")
        if taper[0] >= taper[1]:
            raise r.fail("taper_invA", f"q1 = {taper[0]:g} Å⁻¹ is not below q2 = {taper[1]:g} "
                                       "Å⁻¹; expected [q1, q2] with 0 <= q1 < q2 (the weight "
                                       "falls from 1 at q1 to 0 at q2)")
    species_r = r.sub("species")
    params: dict[str, tuple[float, float, float, float]] = {}
    for name in sorted({a.species for a in atoms}):
        if not species_r.has(name):
            raise species_r.fail(name, f"missing parameters for species '{name}' (atoms list it); "
                                       "expected a table with keys "
                                       f"{', '.join(CONTINUOUS_PARAMETERS)}")
        s = species_r.sub(name)
        a1 = _to_ev(s.number("a1"), to_ev, s, "a1").real
        a2 = s.number("a2_invA2")
        a3 = s.number("a3")
        a4 = s.number("a4_A2")
        if a4 <= 0:
            raise s.fail("a4_A2", f"must be positive, got {a4:g}; expected a4 > 0 (Å²) so that "
                                  "v(q) decays like exp(-a4 q²) at large q")
        if a3 <= 1:
            where = ("vanishes at q = "
                     f"{math.sqrt(-math.log(a3) / a4):.4g} Å⁻¹" if 0 < a3 < 1 else
                     "vanishes at q = 0" if a3 == 1 else "is negative for every q")
            raise s.fail("a3", f"{a3:g} makes the denominator a3·exp(a4 q²) − 1 of v(q), which "
                               f"{where}; expected a3 > 1 (denominator positive for all q >= 0)")
        s.finish()
        # |v(q)| ≤ |a1| (q² + |a2|) e^{−a4 q²}/(a3 − 1) and max q² e^{−a4 q²} = 1/(e a4)
        bound = abs(a1) * (1.0 / (math.e * a4) + abs(a2)) / (a3 - 1.0) * omega0 / atom_measure
        _check_strength(s, "a1", [bound], a_A, "the bound (Ω0/Ω_atom)|a1|(1/(e·a4) + |a2|)/"
                                               "(a3 − 1) on |V|")
        params[name] = (a1, a2, a3, a4)
    species_r.finish()
    r.finish()
    return Potential(form="continuous", file_unit=unit, continuous=params,
                     reference_volume_A=omega0, taper_invA=taper)


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
        if any(abs(x) > MAX_FRACTIONAL_COORDINATE for x in points[name]):
            raise pts_r.fail(label, f"{show_list(list(points[name]))} is outside the accepted "
                                    f"range (magnitude at most {MAX_FRACTIONAL_COORDINATE:g}); "
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
    kind, dim, vectors, a = _read_lattice(lat)
    atoms = _read_atoms(r.raw("atoms"), source, dim, vectors)
    measure = abs(float(np.linalg.det(vectors))) / len(atoms)
    pot = _read_potential(r.sub("potential"), atoms, dim, a, measure)
    cutoff = None
    basis = r.sub("basis", required=False)
    n_bands = None
    if basis is not None:
        why = "beyond any basis of at most 4000 plane waves"
        c_ev = basis.number("cutoff_eV", required=False, positive=True,
                            bounds=(0.0, MAX_CUTOFF_EV), meaning=why)
        c_ry = basis.number("cutoff_Ry", required=False, positive=True,
                            bounds=(0.0, MAX_CUTOFF_EV / ENERGY_UNITS_TO_EV["Ry"]), meaning=why)
        if c_ev is not None and c_ry is not None:
            raise basis.fail("cutoff_Ry", "give either cutoff_eV or cutoff_Ry, not both")
        cutoff = c_ev if c_ev is not None else (
            None if c_ry is None else _to_ev(c_ry, ENERGY_UNITS_TO_EV["Ry"], basis,
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
    r.finish()
    return Material(name=name, source=src, note=note, file=source, lattice_type=kind,
                    dimension=dim, vectors_A=vectors, a_A=a, atoms=atoms, potential=pot,
                    cutoff_eV=cutoff, valence_electrons=electrons, n_bands=n_bands, path=path,
                    spin_orbit=spin_orbit)


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
