"""The ``[potential]`` table of a plane-wave material file: every form, converted to eV.

Part of the material reader (:mod:`bandpert.input.material`). Forms: empty,
symmetric-antisymmetric and per-species form factors on |G|² shells (units (2π/a)²), explicit
Fourier coefficients by Miller index, and the continuous form factors of
:mod:`bandpert.planewave.potential` (with optional slope corrections at the shells,
:mod:`bandpert.planewave.slope_form`). Tabulated forms may list measured deformation potentials
(``[potential.deformation_targets]``) that fix the slopes of their continuous v(q)
(:mod:`bandpert.physics.deformation_fit`). Every problem is an
:class:`~bandpert.errors.InputError` naming the file and the dotted key.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

from ..units import ENERGY_UNITS_TO_EV
from .key_ranges import (
    CONTINUOUS_A3,
    DEFORMATION_UNCERTAINTY_EV,
    DEFORMATION_VALUE_EV,
    KINETIC_FACTOR,
    MAX_POTENTIAL_RATIO,
    POSITIVE,
    SHELL_G2,
    TAPER_START_INVA,
    kinetic_scale_eV,
    potential_limit_eV,
)
from .lattice_input import Atom
from .reader import (
    TableReader,
    describe,
    entries,
    number,
    number_list,
    show_complex,
    show_list,
)

#: Forms of the crystal potential.
POTENTIAL_FORMS = ("empty", "symmetric-antisymmetric", "per-species", "fourier", "continuous")

#: Parameters of one species in the "continuous" form, in file order (a1 in the file's energy
#: unit, a2 in Å⁻², a3 dimensionless, a4 in Å²).
CONTINUOUS_PARAMETERS = ("a1", "a2_invA2", "a3", "a4_A2")

#: Key of the reference atomic volume Ω0 of the "continuous" form, by lattice dimension
#: (the cell's length, area or volume per atom).
REFERENCE_MEASURE_KEYS = {1: "reference_length_A", 2: "reference_area_A2",
                          3: "reference_volume_A3"}

#: Largest accepted magnitude of a Miller index of an explicit Fourier coefficient. Far beyond
#: any basis the plane-wave model allows, and small enough for its integer index arithmetic.
MAX_MILLER_INDEX = 100_000

#: Accepted range of the kinetic factor β (``kinetic_factor``, H0 = β ħ²|k+G|²/2m0): the
#: kinetic-energy scaling of Wang & Zunger (Phys. Rev. B 51, 17398 (1995), from memory) takes
#: values near 1; beyond ±50 % the model is no longer a free-electron plane-wave model. The
#: range itself, like every key's, lives in :mod:`.key_ranges`.
KINETIC_FACTOR_RANGE = KINETIC_FACTOR.closed

#: Relative tolerance under which two |G|² shells count as the same shell.
SHELL_MATCH_TOLERANCE = 1e-6

#: Optional per-species keys of the "continuous" form: slope corrections at shells
#: (:mod:`bandpert.planewave.slope_form`; centres and half-widths in Å⁻¹, changes of dv/dq in
#: the file's energy unit × Å).
SLOPE_KEYS = ("slope_shells_invA", "slope_half_widths_invA", "slope_changes")

#: Largest of |x B(x)|, B(x) = (1 − x²)³ (at x = 1/√7): the slope corrections of
#: :mod:`bandpert.planewave.slope_form` obey |c(q)| ≤ this × Σ_k |δ_k| h_k.
BUMP_PEAK = (1.0 / math.sqrt(7.0)) * (6.0 / 7.0) ** 3

#: Measured deformation potentials a tabulated potential's continuous v(q) may be fitted to
#: (``[potential.deformation_targets]``), with what each one is.
DEFORMATION_TARGETS = {
    "indirect_gap": "dE_g/d ln V of the fundamental gap (conduction minimum − valence maximum)",
    "gamma_gap": "dE_g/d ln V of the gap at Γ (a = a_c − a_v)",
    "x_gap": "dE_g/d ln V of the gap at X",
    "l_gap": "dE_g/d ln V of the gap at L",
    "xi_u": "Ξ_u of the conduction valleys",
    "b": "b = (l − m)/3 of the threefold valence top",
    "d": "d = n/√3 of the threefold valence top",
}


@dataclass(frozen=True)
class DeformationTarget:
    """A measured deformation potential the continuous v(q) is fitted to (eV).

    Attributes
    ----------
    name : str
        A key of :data:`DEFORMATION_TARGETS`.
    value_eV : float
    uncertainty_eV : float
        Its weight in the fit is 1/uncertainty (default max(0.1 |value|, 0.1 eV)).
    source : str
        Where the value comes from.
    """

    name: str
    value_eV: float
    uncertainty_eV: float
    source: str


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
    slope_corrections : dict
        "continuous" form: species → ((q_k in Å⁻¹, h_k in Å⁻¹, δ_k in eV·Å), ...), the slope
        corrections of :mod:`bandpert.planewave.slope_form` (empty: none).
    deformation_targets : tuple of DeformationTarget
        Tabulated forms: measured deformation potentials to fit the slopes of the continuous
        v(q) to (``[potential.deformation_targets]``).
    kinetic_factor : float
        β of the kinetic term β ħ²|k+G|²/2m0 (1 for the free-electron mass; the kinetic-energy
        scaling of L.-W. Wang & A. Zunger, Phys. Rev. B 51, 17398 (1995), from memory).
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
    slope_corrections: dict[str, tuple[tuple[float, float, float], ...]] = field(
        default_factory=dict)
    deformation_targets: tuple[DeformationTarget, ...] = ()
    kinetic_factor: float = 1.0




def convert_to_ev(value: complex, to_ev: float, reader: TableReader, name: str) -> complex:
    """Convert an energy to eV, refusing a value that overflows on the way."""
    z = complex(value) * to_ev
    if not (math.isfinite(z.real) and math.isfinite(z.imag)):
        raise reader.fail(name, f"{show_complex(complex(value))} is too large to convert to eV; "
                                "expected a finite energy")
    return z


def _energies_ev(values: tuple[float, ...], to_ev: float, reader: TableReader,
                 name: str) -> tuple[float, ...]:
    return tuple(convert_to_ev(v, to_ev, reader, name).real for v in values)


def _check_strength(r: TableReader, key: str, values_eV, a_A: float, what: str = "|V|") -> None:
    """Refuse a potential stronger than :data:`MAX_POTENTIAL_RATIO` × the kinetic scale."""
    largest = max((abs(complex(v)) for v in values_eV), default=0.0)
    scale = kinetic_scale_eV(a_A)
    if largest > potential_limit_eV(a_A):
        raise r.fail(key, f"{what} = {largest:.4g} eV is {largest / scale:.3g} times the kinetic "
                          f"scale ħ²(2π/a)²/2m0 = {scale:.4g} eV; expected at most "
                          f"{MAX_POTENTIAL_RATIO:g} times (a potential that strong needs a basis "
                          "no plane-wave model holds)")


def _read_targets(r: TableReader, form: str) -> tuple[DeformationTarget, ...]:
    """``[potential.deformation_targets]``: name = {value_eV, source, uncertainty_eV}."""
    t = r.sub("deformation_targets", required=False)
    if t is None:
        return ()
    if form not in ("symmetric-antisymmetric", "per-species"):
        raise r.fail("deformation_targets", "measured deformation potentials fix the slopes of a "
                                            "continuous v(q) fitted to tabulated form factors; "
                                            f"form '{form}' has none (expected form "
                                            "symmetric-antisymmetric or per-species)")
    out = []
    for name in t.table:
        if name not in DEFORMATION_TARGETS:
            raise t.fail(name, f"unknown deformation potential; expected one of: "
                               f"{', '.join(DEFORMATION_TARGETS)}")
        e = t.sub(name)
        value = e.number("value_eV", bounds=DEFORMATION_VALUE_EV.closed,
                         meaning="measured deformation potentials lie within about ±20 eV")
        sigma = e.number("uncertainty_eV", required=False, positive=True,
                         bounds=DEFORMATION_UNCERTAINTY_EV.closed,
                         meaning="the weight of the target in the fit is 1/uncertainty")
        source = e.string("source")
        if not source.strip():
            raise e.fail("source", "must not be empty; expected where the measured value comes "
                                   "from")
        e.finish()
        out.append(DeformationTarget(name, value, max(0.1 * abs(value), 0.1) if sigma is None
                                     else sigma, source))
    t.finish()
    return tuple(out)


def read_potential(r: TableReader, atoms: tuple[Atom, ...], dim: int, a_A: float,
                   atom_measure: float) -> Potential:
    """The ``[potential]`` table (module docstring), with its optional ``kinetic_factor``."""
    factor = r.number("kinetic_factor", required=False, default=1.0,
                      bounds=KINETIC_FACTOR_RANGE,
                      meaning="β of the kinetic term β ħ²|k+G|²/2m0, dimensionless")
    return replace(_read_form(r, atoms, dim, a_A, atom_measure), kinetic_factor=float(factor))


def _read_form(r: TableReader, atoms: tuple[Atom, ...], dim: int, a_A: float,
               atom_measure: float) -> Potential:
    form = r.string("form", choices=POTENTIAL_FORMS)
    targets = _read_targets(r, form)
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
                z = convert_to_ev(complex(re_im[0], re_im[1]), to_ev, e, "value")
            else:
                z = convert_to_ev(number(value, e, "value"), to_ev, e, "value")
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
    if not all(SHELL_G2.contains(s) for s in shells):
        raise r.fail("shells", f"{list(shells)} has a |G|² outside the accepted range "
                               f"{SHELL_G2.lo:g} to {SHELL_G2.hi:g}; expected non-negative "
                               "values in units "
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
                         symmetric_eV=sym_ev, antisymmetric_eV=anti_ev,
                         deformation_targets=targets)
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
    return Potential(form=form, file_unit=unit, shells_g2=shells, species_eV=values,
                     deformation_targets=targets)


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
        if not TAPER_START_INVA.contains(taper[0]):
            raise r.fail("taper_invA", f"q1 = {taper[0]:g} Å⁻¹ is negative; expected "
                                       "0 <= q1 < q2 (Å⁻¹)")
        if taper[0] >= taper[1]:
            raise r.fail("taper_invA", f"q1 = {taper[0]:g} Å⁻¹ is not below q2 = {taper[1]:g} "
                                       "Å⁻¹; expected [q1, q2] with 0 <= q1 < q2 (the weight "
                                       "falls from 1 at q1 to 0 at q2)")
    species_r = r.sub("species")
    params: dict[str, tuple[float, float, float, float]] = {}
    corrections: dict[str, tuple[tuple[float, float, float], ...]] = {}
    for name in sorted({a.species for a in atoms}):
        if not species_r.has(name):
            raise species_r.fail(name, f"missing parameters for species '{name}' (atoms list it); "
                                       "expected a table with keys "
                                       f"{', '.join(CONTINUOUS_PARAMETERS)}")
        s = species_r.sub(name)
        a1 = convert_to_ev(s.number("a1"), to_ev, s, "a1").real
        a2 = s.number("a2_invA2")
        a3 = s.number("a3")
        a4 = s.number("a4_A2")
        bumps = _read_slopes(s, to_ev)
        if not POSITIVE.contains(a4):
            raise s.fail("a4_A2", f"must be positive, got {a4:g}; expected a4 > 0 (Å²) so that "
                                  "v(q) decays like exp(-a4 q²) at large q")
        if not CONTINUOUS_A3.contains(a3):
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
        if bumps:
            bound = BUMP_PEAK * sum(abs(d) * h for _, h, d in bumps) * omega0 / atom_measure
            _check_strength(s, "slope_changes", [bound], a_A,
                            "the bound (Ω0/Ω_atom) 0.24 Σ|δ_k| h_k on the correction's |V|")
            corrections[name] = bumps
        params[name] = (a1, a2, a3, a4)
    species_r.finish()
    r.finish()
    return Potential(form="continuous", file_unit=unit, continuous=params,
                     reference_volume_A=omega0, taper_invA=taper, slope_corrections=corrections)


def _read_slopes(s: TableReader, to_ev: float) -> tuple[tuple[float, float, float], ...]:
    """The optional slope corrections of one species (:data:`SLOPE_KEYS`), δ in eV·Å.

    All three lists or none; equal lengths; centres ascending and positive, each bump
    (q_k − h_k, q_k + h_k) inside q > 0 and apart from its neighbours.
    """
    given = [k for k in SLOPE_KEYS if s.has(k)]
    if not given:
        return ()
    missing = [k for k in SLOPE_KEYS if k not in given]
    if missing:
        raise s.fail(missing[0], f"missing; {given[0]} needs all of {', '.join(SLOPE_KEYS)}")
    centres = number_list(s.raw(SLOPE_KEYS[0]), s, SLOPE_KEYS[0], positive=True)
    n = len(centres)
    widths = number_list(s.raw(SLOPE_KEYS[1]), s, SLOPE_KEYS[1], length=n, positive=True)
    changes = number_list(s.raw(SLOPE_KEYS[2]), s, SLOPE_KEYS[2], length=n)
    for i, (q, h) in enumerate(zip(centres, widths, strict=True)):
        if h > q:
            raise s.fail(SLOPE_KEYS[1], f"half-width {h:g} Å⁻¹ exceeds its centre {q:g} Å⁻¹; "
                                        "expected each bump (q - h, q + h) within q > 0")
        if i and centres[i - 1] + widths[i - 1] > q - h:
            raise s.fail(SLOPE_KEYS[1], f"the bumps at {centres[i - 1]:g} and {q:g} Å⁻¹ "
                                        "overlap; expected ascending centres with "
                                        "q_k + h_k <= q_k+1 - h_k+1")
    return tuple((q, h, convert_to_ev(d, to_ev, s, SLOPE_KEYS[2]).real)
                 for q, h, d in zip(centres, widths, changes, strict=True))
