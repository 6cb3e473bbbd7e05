"""Continuous atomic form factors v(q) and their fit to tabulated form factors.

Tabulated (Cohen–Bergstresser) form factors exist only on the |G|² shells of the reference
lattice. Under strain the shells split and under a change of lattice constant |G| moves, so a
parameter sweep needs v as a function of q. bandpert uses the form

    v(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1)

of Friedel, Hybertsen & Schlüter, Phys. Rev. B 39, 7974 (1989) (the functional form is quoted from
memory), with q in Å⁻¹, a1 an energy, a2 in Å⁻², a3 dimensionless, a4 in Å². In a crystal with N
atoms at r_j in a cell of measure Ω (volume, area or length), Ω_atom = Ω/N,

    V(G) = (Ω0/Ω_atom) w(|G|) (1/N) Σ_j v_j(|G|) exp(−i G·r_j),      V(G = 0) = 0,

where Ω0 is the atomic volume at which the parameters hold (the atomic form factor is a Fourier
transform over the atomic volume, hence the 1/Ω scaling) and w is an optional smooth taper. V(0)
is set to zero as in the tabulated forms, which list no G = 0 shell; it only shifts every energy.

:func:`fit_continuous_potential` fits the parameters to a material with tabulated form factors so
that, at the reference lattice, the continuous model has the same V(G) at every G (hence the same
bands), and v tends to −(2/3) E_F as q → 0 (the screened long-wavelength limit; Cohen & Heine,
Solid State Physics 24 (1970); Cohen & Chelikowsky, Electronic Structure and Optical Properties of
Semiconductors (1988); both from memory).
"""

from __future__ import annotations

import copy
import itertools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.optimize import least_squares

from ..crystal.lattice import reciprocal_vectors
from ..errors import InputError
from ..input.material import (
    CONTINUOUS_PARAMETERS,
    REFERENCE_MEASURE_KEYS,
    Material,
    parse_material,
)
from ..units import ENERGY_UNITS_TO_EV, HBAR2_OVER_2M0_EV_A2
from .basis import plane_wave_basis
from .potential import (
    check_shells_exist,
    continuous_form_factor,
    fourier_coefficients,
)

#: Tabulated forms the fit accepts.
TABULATED_FORMS = ("symmetric-antisymmetric", "per-species")

#: The taper of a fit runs over the middle of the gap between the last listed shell and the next
#: lattice shell: from q_last + f Δ to q_next − f Δ with Δ = q_next − q_last and this f.
TAPER_GAP_FRACTION = 0.25

#: Parameters that may be shared between species in a fit (names as in the file).
SHAREABLE = CONTINUOUS_PARAMETERS

#: Residual evaluations a fit may spend over all its starts (about two full starts, a few
#: seconds): a well-posed tabulated set converges in the first start (silicon 7 evaluations,
#: GaAs 257); a pathological one is stopped here and judged by its best start.
FIT_EVALUATION_BUDGET = 6000

#: Largest |residual| (eV) for which a fit counts as exact (starts stop searching below it).
EXACT_RESIDUAL_EV = 1e-11

#: Relative tolerance for grouping |G|² into shells.
_SHELL_RTOL = 1e-6


# --------------------------------------------------------------------------------------------
# the functions
# --------------------------------------------------------------------------------------------


def free_electron_fermi_energy_eV(density_invA3: float) -> float:
    """Fermi energy E_F = ħ² (3π² n)^{2/3} / 2m0 of a free-electron gas of density n (Å⁻³).

    Spin-degenerate 3D gas (Ashcroft & Mermin, Solid State Physics (1976), ch. 2, from memory;
    common practice).
    """
    return HBAR2_OVER_2M0_EV_A2 * (3.0 * math.pi**2 * density_invA3) ** (2.0 / 3.0)


def long_wavelength_limit_eV(material: Material) -> float:
    """The screened q → 0 limit −(2/3) E_F of the cell-averaged form factor (eV).

    E_F is the free-electron Fermi energy of the valence electrons
    (:func:`free_electron_fermi_energy_eV`); the limit is that of a Thomas–Fermi-screened ionic
    pseudopotential (Cohen & Heine, Solid State Physics 24 (1970); Cohen & Chelikowsky,
    Electronic Structure and Optical Properties of Semiconductors (1988); from memory).

    Raises
    ------
    InputError
        If the material is not 3D or gives no ``electrons.valence``.
    """
    if material.dimension != 3:
        raise InputError(f"the long-wavelength limit -(2/3) E_F holds for a 3D electron gas; "
                         f"this lattice is {material.dimension}D", material.file, "lattice")
    if material.valence_electrons is None:
        raise InputError("missing; the long-wavelength condition v(q -> 0) = -(2/3) E_F needs the "
                         "valence electrons per primitive cell", material.file, "electrons.valence")
    return -2.0 / 3.0 * free_electron_fermi_energy_eV(material.valence_electrons
                                                      / material.volume_A)


# --------------------------------------------------------------------------------------------
# the fit
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class FormFactorParameters:
    """Parameters of v(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1) for one species."""

    a1_eV: float
    a2_invA2: float
    a3: float
    a4_A2: float

    def __call__(self, q_invA: np.ndarray | float) -> np.ndarray:
        """v(q) in eV (:func:`continuous_form_factor`)."""
        return continuous_form_factor(q_invA, self.a1_eV, self.a2_invA2, self.a3, self.a4_A2)

    @property
    def v0_eV(self) -> float:
        """v(0) = −a1 a2 / (a3 − 1)."""
        return -self.a1_eV * self.a2_invA2 / (self.a3 - 1.0)


@dataclass(frozen=True)
class ContinuousFit:
    """A continuous form factor fitted to a tabulated one.

    Attributes
    ----------
    material_name : str
    species : dict
        Species → :class:`FormFactorParameters` (a1 in eV).
    reference_volume_A3 : float
        Ω0: cell volume / atoms of the reference lattice (Å³).
    taper_invA : tuple of float
        (q1, q2) of the taper (Å⁻¹).
    residuals_eV : dict
        Lattice shell |G|² in (2π/a)² → max |V_fit(G) − V_tab(G)| over the G of that shell (eV),
        for every shell from the first to the last listed one (unlisted ones have V_tab = 0).
    shell_q_invA : dict
        The same shells → |G| in Å⁻¹.
    fermi_energy_eV : float
        Free-electron E_F of the valence electrons.
    long_wavelength_target_eV : float
        −(2/3) E_F.
    long_wavelength_residual_eV : float
        (1/N) Σ_j v_j(0) − (−(2/3) E_F).
    shared : tuple of str
        Parameters common to all species.
    n_conditions, n_unknowns : int
        Independent real conditions (rank of the observable rows and one for q → 0) and free
        parameters.
    file_unit : str
        Energy unit of the source file, used by :meth:`potential_table`.
    """

    material_name: str
    species: dict[str, FormFactorParameters]
    reference_volume_A3: float
    taper_invA: tuple[float, float]
    residuals_eV: dict[float, float]
    shell_q_invA: dict[float, float]
    fermi_energy_eV: float
    long_wavelength_target_eV: float
    long_wavelength_residual_eV: float
    shared: tuple[str, ...]
    n_conditions: int
    n_unknowns: int
    file_unit: str = "eV"
    starts_tried: int = field(default=0, compare=False)

    @property
    def max_residual_eV(self) -> float:
        """Largest |ΔV(G)| over the fitted shells (eV)."""
        return max(self.residuals_eV.values())

    def potential_table(self, unit: str | None = None) -> dict[str, Any]:
        """The ``[potential]`` table of form "continuous", ready for :func:`parse_material`.

        Parameters
        ----------
        unit : str, optional
            "eV" or "Ry" for ``a1``; default: the source file's unit.

        Returns
        -------
        dict
            ``{"form": "continuous", "unit", "reference_volume_A3", "taper_invA",
            "species": {name: {"a1", "a2_invA2", "a3", "a4_A2"}}}``.
        """
        unit = self.file_unit if unit is None else unit
        if unit not in ENERGY_UNITS_TO_EV:
            raise InputError(f"'{unit}' is not one of: {', '.join(ENERGY_UNITS_TO_EV)}",
                             key="unit")
        to_unit = 1.0 / ENERGY_UNITS_TO_EV[unit]
        return {
            "form": "continuous",
            "unit": unit,
            REFERENCE_MEASURE_KEYS[3]: float(self.reference_volume_A3),
            "taper_invA": [float(x) for x in self.taper_invA],
            "species": {name: {"a1": float(p.a1_eV * to_unit), "a2_invA2": float(p.a2_invA2),
                               "a3": float(p.a3), "a4_A2": float(p.a4_A2)}
                        for name, p in self.species.items()},
        }


def with_kinetic_factor(table: dict[str, Any], document: dict[str, Any]) -> dict[str, Any]:
    """``table`` (a new ``[potential]`` table) with the ``kinetic_factor`` of ``document``'s.

    β belongs to H0, not to v(q): a potential rewritten in another form keeps it.
    """
    old = document.get("potential")
    if isinstance(old, dict) and "kinetic_factor" in old:
        return {**table, "kinetic_factor": old["kinetic_factor"]}
    return table


def _lattice_shells(material: Material, q_max_invA: float
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Non-zero lattice G up to q_max: Miller indices, Cartesian G, and a shell label per G."""
    basis = plane_wave_basis(reciprocal_vectors(material.vectors_A),
                             HBAR2_OVER_2M0_EV_A2 * q_max_invA**2 * (1 + 1e-9))
    g = basis.g_cart_invA
    g2 = np.einsum("ij,ij->i", g, g)
    keep = g2 > 0
    miller, g, g2 = basis.miller[keep], g[keep], g2[keep]
    # group sorted |G|² into shells
    order = np.argsort(g2, kind="stable")
    miller, g, g2 = miller[order], g[order], g2[order]
    new = np.r_[True, np.diff(g2) > _SHELL_RTOL * g2[1:]]
    return miller, g, np.cumsum(new) - 1


def _unpack(x: np.ndarray, names: list[str], shared: tuple[str, ...]
            ) -> dict[str, tuple[float, float, float, float]]:
    """Free variables → (a1, a2, a3, a4) per species; a3 = 1 + e^{x}, a4 = e^{x}."""
    per = [p for p in CONTINUOUS_PARAMETERS if p not in shared]
    it = iter(x)
    common = {p: next(it) for p in CONTINUOUS_PARAMETERS if p in shared}
    out = {}
    for name in names:
        raw = dict(common)
        raw.update({p: next(it) for p in per})
        out[name] = (raw["a1"], raw["a2_invA2"], 1.0 + math.exp(min(raw["a3"], 700.0)),
                     math.exp(min(raw["a4_A2"], 700.0)))
    return out


def fit_continuous_potential(material: Material, shared: tuple[str, ...] = ("a3",),
                             start: ContinuousFit | None = None) -> ContinuousFit:
    """Fit v_j(q) of the continuous form to a material's tabulated form factors.

    Conditions, all in eV and solved by least squares (:func:`scipy.optimize.least_squares`,
    several starts):

    * at every lattice G with 0 < |G| ≤ |G_last| (the last listed shell), the continuous
      (1/N) Σ_j v_j(|G|) e^{−iG·r_j} equals the tabulated V(G) (real and imaginary parts; each
      shell's rows are weighted by 1/√(number of its G), so each shell counts once). Only the
      observable combinations enter, e.g. V_S on |G|² = 4 (2π/a)² in diamond, where cos(G·τ) = 0,
      gives identically zero rows; unlisted shells in this range have V_tab = 0;
    * the cell average (1/N) Σ_j v_j(0) equals −(2/3) E_F (:func:`long_wavelength_limit_eV`).

    The taper then switches v off between the last listed shell and the next lattice shell
    (:data:`TAPER_GAP_FRACTION`), so at the reference lattice every G of the basis has the
    tabulated V(G): listed shells at weight 1, every farther shell at weight 0.

    Parameters
    ----------
    material : Material
        A 3D material of form "symmetric-antisymmetric" or "per-species", with
        ``electrons.valence``.
    start : ContinuousFit, optional
        Start from these parameters only (one least-squares run of at most 400 evaluations)
        instead of the grid of starts.
    shared : tuple of str
        Parameters common to all species (names from :data:`SHAREABLE`). The default shares a3:
        with one species the fit has 4 unknowns, with two 7 — as many as the independent
        conditions of diamond (3 shells + q → 0) and zincblende (V_S on 3, 8, 11, V_A on 3, 4,
        11, + q → 0).

    Returns
    -------
    ContinuousFit

    Raises
    ------
    InputError
        For another form, a missing valence, a non-3D lattice, or when no start gives finite
        parameters.
    """
    pot = material.potential
    if pot.form not in TABULATED_FORMS:
        raise InputError(f"form '{pot.form}' has no tabulated form factors to fit; expected one "
                         f"of: {', '.join(TABULATED_FORMS)}", material.file, "potential.form")
    bad = [s for s in shared if s not in SHAREABLE]
    if bad:
        raise InputError(f"'{bad[0]}' is not a parameter; expected names from: "
                         f"{', '.join(SHAREABLE)}", key="shared")
    target0 = long_wavelength_limit_eV(material)
    b = reciprocal_vectors(material.vectors_A)
    unit_q = 2.0 * math.pi / material.a_A
    q_last = unit_q * math.sqrt(max(pot.shells_g2))
    if q_last == 0.0:
        raise InputError("only |G|² = 0 is listed; expected at least one non-zero shell to fit",
                         material.file, "potential.shells")
    q_search = q_last + float(np.max(np.linalg.norm(b, axis=1)))
    check_shells_exist(material, plane_wave_basis(b, HBAR2_OVER_2M0_EV_A2 * q_search**2))
    miller, g, shell = _lattice_shells(material, q_search)
    q = np.linalg.norm(g, axis=1)
    inside = q <= q_last * (1 + _SHELL_RTOL)
    beyond = ~inside
    q_next = float(q[beyond].min())
    miller, g, shell, q = miller[inside], g[inside], shell[inside], q[inside]
    v_tab = fourier_coefficients(material, miller)
    counts = np.bincount(shell)[shell]
    weight = 1.0 / np.sqrt(counts)
    positions = material.positions_cart_A
    names = sorted({a.species for a in material.atoms})
    n_atoms = len(material.atoms)
    # structure factor of each species: S_s(G) = (1/N) Σ_{j of s} e^{−iG·r_j}
    phase = np.exp(-1j * (g @ positions.T))
    structure = np.stack([phase[:, [a.species == s for a in material.atoms]].sum(axis=1)
                          for s in names]) / n_atoms
    fraction = np.array([sum(a.species == s for a in material.atoms) for s in names]) / n_atoms

    def residual(x: np.ndarray) -> np.ndarray:
        params = _unpack(x, names, shared)
        v_fit = np.zeros(q.shape, dtype=complex)
        v0 = 0.0
        for s_row, f, name in zip(structure, fraction, names, strict=True):
            a1, a2, a3, a4 = params[name]
            v_fit += continuous_form_factor(q, a1, a2, a3, a4) * s_row
            v0 += f * (-a1 * a2 / (a3 - 1.0))
        d = (v_fit - v_tab) * weight
        return np.concatenate([d.real, d.imag, [v0 - target0]])

    # rank of the observable conditions (for the report): rows of the Jacobian-free linear map
    # "form factor of species s on shell k" → V(G)
    n_shells = int(shell.max()) + 1
    design = np.zeros((2 * q.size, n_shells * len(names)))
    for i, s_row in enumerate(structure):
        cols = i * n_shells + shell
        design[np.arange(q.size), cols] = (s_row * weight).real
        design[q.size + np.arange(q.size), cols] = (s_row * weight).imag
    n_conditions = int(np.linalg.matrix_rank(design, tol=1e-9)) + 1

    per = [p for p in CONTINUOUS_PARAMETERS if p not in shared]
    n_unknowns = len(CONTINUOUS_PARAMETERS) - len(per) + len(per) * len(names)
    q_first = float(q.min())
    best = None
    tried = used = 0
    for x0 in _starts(names, shared, per, q_first, target0, start):
        if used >= FIT_EVALUATION_BUDGET:
            break
        tried += 1
        with np.errstate(all="ignore"):
            sol = least_squares(residual, np.array(x0), xtol=1e-15, ftol=1e-15, gtol=1e-15,
                                max_nfev=min(3000 if start is None else 400,
                                             FIT_EVALUATION_BUDGET - used))
        used += sol.nfev
        if not (np.all(np.isfinite(sol.x)) and np.isfinite(sol.cost)):
            continue
        if best is None or sol.cost < best.cost:
            best = sol
        if np.max(np.abs(sol.fun)) < EXACT_RESIDUAL_EV:
            break
    if best is None:
        raise InputError("no start of the continuous form-factor fit converged to finite "
                         "parameters; expected tabulated form factors of a decaying potential",
                         material.file, "potential")
    params = {k: FormFactorParameters(*map(float, v))
              for k, v in _unpack(best.x, names, shared).items()}
    r = best.fun
    dv = np.hypot(r[:q.size], r[q.size:2 * q.size]) / weight
    shells_g2 = np.array([float(np.mean((q[shell == k] / unit_q) ** 2)) for k in range(n_shells)])
    residuals = {round(float(s2), 9): float(dv[shell == k].max())
                 for k, s2 in enumerate(shells_g2)}
    shell_q = {round(float(s2), 9): float(unit_q * math.sqrt(s2)) for s2 in shells_g2}
    gap = q_next - q_last
    taper = (q_last + TAPER_GAP_FRACTION * gap, q_next - TAPER_GAP_FRACTION * gap)
    return ContinuousFit(
        material_name=material.name, species=params,
        reference_volume_A3=material.volume_A / n_atoms, taper_invA=taper,
        residuals_eV=residuals, shell_q_invA=shell_q,
        fermi_energy_eV=-1.5 * target0, long_wavelength_target_eV=target0,
        long_wavelength_residual_eV=float(r[2 * q.size]), shared=tuple(shared),
        n_conditions=n_conditions, n_unknowns=n_unknowns, file_unit=pot.file_unit,
        starts_tried=tried)


def _starts(names: list[str], shared: tuple[str, ...], per: list[str], q_first: float,
            target0: float, start: ContinuousFit | None):
    """Free-variable starts of the fit: a grid, or the parameters of a previous fit."""
    if start is not None:
        raw = {n: {"a1": p.a1_eV, "a2_invA2": p.a2_invA2, "a3": math.log(p.a3 - 1.0),
                   "a4_A2": math.log(p.a4_A2)} for n, p in start.species.items()}
        x0 = [raw[names[0]][p] for p in CONTINUOUS_PARAMETERS if p in shared]
        yield x0 + [raw[n][p] for n in names for p in per]
        return
    for a2_factor, ln_a3m1, a4 in itertools.product((2.0, 1.5, 3.0, 1.0), (2.5, 1.0, 4.0),
                                                    (0.1, 0.05, 0.3)):
        a2 = a2_factor * q_first**2
        a1 = -target0 * math.exp(ln_a3m1) / a2  # so that v(0) starts at the target
        first = {"a1": a1, "a2_invA2": a2, "a3": ln_a3m1, "a4_A2": math.log(a4)}
        x0 = [first[p] for p in CONTINUOUS_PARAMETERS if p in shared]
        yield x0 + [first[p] for _ in names for p in per]


def continuous_document(doc: dict[str, Any], source: str = "",
                        shared: tuple[str, ...] = ("a3",)) -> dict[str, Any]:
    """A copy of a material document with its tabulated potential replaced by the fitted one.

    The copy keeps every other table (lattice, atoms, basis, electrons, path), so a parameter
    sweep can vary ``doc["lattice"]`` afterwards and call :func:`parse_material` on it. The
    ``source`` string gains a note naming the continuous form.

    Parameters
    ----------
    doc : dict
        A parsed material TOML document with a tabulated potential.
    source : str
        The file name, for error messages.
    shared : tuple of str
        Passed to :func:`fit_continuous_potential`.

    Returns
    -------
    dict
        A deep copy with ``potential`` of form "continuous".
    """
    fit = fit_continuous_potential(parse_material(doc, source), shared=shared)
    out = copy.deepcopy(doc)
    out["potential"] = with_kinetic_factor(fit.potential_table(), doc)
    out["source"] = (f"{doc['source']}; continuous form factors v(q) of Friedel, Hybertsen & "
                     "Schlüter, Phys. Rev. B 39, 7974 (1989) fitted to them by bandpert")
    return out
