"""Deformation potentials: how band energies move under a homogeneous strain.

First-order strain perturbation theory on the plane-wave eigenstates. With the atoms at fixed
fractional positions and k fixed in reciprocal fractions, a strain ε changes
H(k)_{GG'} = C|k + G|² δ_{GG'} + V(G − G') by

    ∂H/∂ε_ij = −2C (k + G)_i (k + G)_j δ_{GG'} + ∂V(G − G')/∂ε_ij,

(:func:`bandpert.planewave.strain_potential.strain_derivative_of_potential` for the potential),
and the shift of a level, or the splitting of a degenerate set, is given by the eigenvalues of
P ∂H/∂ε P in the set (Hellmann–Feynman / degenerate first-order perturbation theory; Bir & Pikus,
Symmetry and Strain-Induced Effects in Semiconductors, 1974). No finite-difference stencil is
involved, so no basis can change between stencil points; the matrix is built on one basis
centred on k (:func:`bandpert.physics.critical_points.centred_model`).

A bulk model with V(G = 0) = 0 has no absolute energy reference, so only differences are
physical: the hydrostatic deformation potential of each gap, dE_g/d ln V; for a conduction valley
along k̂ (E_c shifts by Ξ_d tr ε + Ξ_u k̂·ε·k̂) the uniaxial Ξ_u and the combination
Ξ_d + Ξ_u/3 − a_v (the hydrostatic potential of the indirect gap); for the spinless threefold
valence top (Γ25′/Γ15) the Bir–Pikus l, m, n (the strain analogues of the DKK L, M, N: uniaxial
strain along x gives {l, m, m}, the strain ε_ij = 1/3 for all i, j gives (l + 2m)/3 + 2n/3 once
and (l + 2m)/3 − n/3 twice) and from them b = (l − m)/3, d = n/√3 (CONVENTIONS.md).

The potential must follow the strain continuously: tabulated form factors are first replaced by
the fitted continuous v(q) (:mod:`bandpert.planewave.formfactor`), which equals them exactly at the
reference lattice.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..crystal.lattice import point_group_rotations, reciprocal_vectors
from ..errors import InputError
from ..input.material import Material, parse_material
from ..physics.bands import compute_band_structure, default_bands
from ..physics.critical_points import centred_model, degenerate_group
from ..physics.extrema import EdgeLocation, levels, locate_edges
from ..physics.internal_strain import (
    internal_displacements,
    internal_strain_parameter,
    internal_strain_potential,
)
from ..planewave.cutoff import choose_cutoff
from ..planewave.formfactor import (
    ContinuousFit,
    SlopeCondition,
    fit_continuous_potential,
)
from ..planewave.model import PlaneWaveModel
from ..planewave.solver import single_blas_thread
from ..planewave.strain_potential import (
    continuous_form_factor_slope,
    strain_derivative_of_potential,
)
from ..units import HBAR2_OVER_2M0_EV_A2 as C

#: Potential forms whose deformation potentials bandpert computes (tabulated ones are fitted).
STRAIN_FOLLOWING_FORMS = ("symmetric-antisymmetric", "per-species", "continuous")


def _hydrostatic(d: int) -> np.ndarray:
    """Strain with tr ε = 1 (d ln V = 1) and no shear."""
    return np.eye(d) / d


@dataclass(frozen=True)
class DeformationPotentials:
    """Deformation potentials of a semiconductor at its reference lattice (eV).

    Attributes
    ----------
    gap_hydrostatic_eV : dict
        Gap name → dE_g/d ln V: "indirect" (conduction minimum − valence maximum) and
        "<P>" for the gap between the highest valence and lowest conduction levels at each
        labelled point P.
    conduction_valley : str
        Where the conduction minimum lies.
    xi_u_eV : float or None
        Uniaxial Ξ_u of the conduction valleys (None for a valley at Γ).
    xi_d_plus_xi_u_over_3_minus_a_v_eV : float
        Ξ_d + Ξ_u/3 − a_v (equal to the indirect gap's hydrostatic potential).
    valence_lmn_eV : tuple of float or None
        Bir–Pikus l, m, n of a threefold valence top (they include the unphysical absolute
        shift a_v = (l + 2m)/3; only b and d are reported as physical).
    b_eV, d_eV : float or None
        b = (l − m)/3 and d = n/√3.
    internal_strain_zeta : float
        Kleinman's ζ used for the shear potentials (d, and Ξ_u of valleys off the cube axes);
        0 where no measured value is known (:mod:`bandpert.physics.internal_strain`).
    internal_strain_source : str
        Where ζ comes from, or why it is 0.
    """

    gap_hydrostatic_eV: dict[str, float]
    conduction_valley: str
    xi_u_eV: float | None
    xi_d_plus_xi_u_over_3_minus_a_v_eV: float
    valence_lmn_eV: tuple[float, float, float] | None
    b_eV: float | None
    d_eV: float | None
    internal_strain_zeta: float = 0.0
    internal_strain_source: str = ""


def strain_hamiltonian(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray,
                       strain: np.ndarray, slopes: dict | None = None,
                       shell_of: np.ndarray | None = None, zeta: float = 0.0) -> np.ndarray:
    """Σ_ij ε_ij ∂H(k)/∂ε_ij on the model's basis (eV; module docstring).

    ``slopes``/``shell_of`` are passed to
    :func:`~bandpert.planewave.strain_potential.strain_derivative_of_potential` (fit conditions).
    ``zeta`` is Kleinman's internal-strain parameter: the shift of the atoms under a shear
    (:mod:`bandpert.physics.internal_strain`) adds its δV(G).
    """
    eps = np.asarray(strain, dtype=float)
    kg = np.asarray(k_cart_invA, dtype=float)[None, :] + model.basis.g_cart_invA
    diff = model.basis.miller[:, None, :] - model.basis.miller[None, :, :]
    g_diff = diff @ model.reciprocal_invA
    dv = strain_derivative_of_potential(material, g_diff, eps, slopes, shell_of)
    moves = internal_displacements(material, eps, zeta)
    if np.any(moves):
        dv = dv + internal_strain_potential(material, g_diff, moves)
    h = dv.real if model.is_real else dv
    h = np.array(h, copy=True)
    idx = np.arange(model.size)
    h[idx, idx] += -2.0 * C * np.einsum("gi,ij,gj->g", kg, eps, kg)
    return h


def set_shifts(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray,
               bands: np.ndarray, strains: list[np.ndarray], **kw) -> list[np.ndarray]:
    """Ascending first-order shifts of a (degenerate) set of bands at k per unit of each strain.

    Eigenvalues of P (Σ ε_ij ∂H/∂ε_ij) P in the set (degenerate first-order perturbation
    theory), on ``model`` (one basis for every strain).
    """
    k = np.asarray(k_cart_invA, dtype=float)
    c = levels(model, k, int(np.max(bands)) + 1)[1][:, bands]
    return [np.linalg.eigvalsh(c.conj().T @ strain_hamiltonian(material, model, k, e, **kw) @ c)
            for e in strains]


def _single_and_double(w: np.ndarray) -> tuple[float, float]:
    w = np.sort(w)
    if abs(w[1] - w[0]) < abs(w[2] - w[1]):
        return float(w[2]), float(0.5 * (w[0] + w[1]))
    return float(w[0]), float(0.5 * (w[1] + w[2]))


def _hydrostatic_shift(material: Material, k: np.ndarray, band: int, cutoff_eV: float,
                       run_model: PlaneWaveModel) -> float:
    """Mean hydrostatic shift (per ln V) of the degenerate set holding ``band`` at k."""
    sym = centred_model(material, k, cutoff_eV)
    group = degenerate_group(material, run_model, k, band, sym)[0]
    return float(np.mean(set_shifts(material, sym, k, group, [_hydrostatic(k.size)])[0]))


def deformation_potentials(material: Material, model: PlaneWaveModel,
                           edges: list[EdgeLocation], points: dict[str, np.ndarray],
                           rotations: np.ndarray | None) -> DeformationPotentials:
    """Hydrostatic, uniaxial and shear deformation potentials at the reference lattice.

    Parameters
    ----------
    material : Material
        A 3D semiconductor with a "continuous" potential (use
        :func:`bandpert.physics.deformation_fit.continuous_material` for tabulated form factors).
    model : PlaneWaveModel
        Its model at the run's cutoff (the centred bases use the same cutoff).
    edges : list of EdgeLocation
        Conduction minimum and valence maximum (:func:`bandpert.physics.extrema.locate_edges`).
    points : dict
        Label → fractional k of the labelled points whose gaps to report.
    rotations : numpy.ndarray or None
        Point group (spglib, fractional direct) to find a second conduction valley.

    Raises
    ------
    InputError
        For a potential that is not "continuous" or a lattice that is not 3D.
    """
    if material.potential.form != "continuous":
        raise InputError("deformation potentials need a potential that follows the strain; "
                         "expected the continuous form (fit tabulated form factors first)",
                         material.file, "potential.form")
    if material.dimension != 3:
        raise InputError("deformation potentials are defined here for 3D crystals",
                         material.file, "lattice")
    cutoff = model.basis.cutoff_eV
    cond = next(e for e in edges if not e.maximum)
    val = next(e for e in edges if e.maximum)
    n_val = val.band + 1
    b = model.reciprocal_invA
    gaps = {"indirect": (_hydrostatic_shift(material, cond.k_cart_invA, cond.band, cutoff, model)
                         - _hydrostatic_shift(material, val.k_cart_invA, val.band, cutoff,
                                              model))}
    for label, k_frac in points.items():
        k = np.asarray(k_frac, dtype=float) @ b
        gaps[label] = (_hydrostatic_shift(material, k, n_val, cutoff, model)
                       - _hydrostatic_shift(material, k, n_val - 1, cutoff, model))
    zeta, zeta_source = internal_strain_parameter(material)
    xi_u = _xi_u(material, model, cond, rotations, zeta)
    lmn = b_ev = d_ev = None
    k_v = val.k_cart_invA
    sym = centred_model(material, k_v, cutoff)
    group = degenerate_group(material, model, k_v, val.band, sym)[0]
    if group.size == 3:
        ex = np.zeros((3, 3))
        ex[0, 0] = 1.0
        uni, shear = set_shifts(material, sym, k_v, group, [ex, np.full((3, 3), 1.0 / 3.0)],
                                zeta=zeta)
        big_l, big_m = _single_and_double(uni)
        single, double = _single_and_double(shear)
        big_n = single - double
        lmn = (big_l, big_m, big_n)
        b_ev, d_ev = (big_l - big_m) / 3.0, big_n / np.sqrt(3.0)
    return DeformationPotentials(gap_hydrostatic_eV={k: float(v) for k, v in gaps.items()},
                                 conduction_valley=cond.where, xi_u_eV=xi_u,
                                 xi_d_plus_xi_u_over_3_minus_a_v_eV=float(gaps["indirect"]),
                                 valence_lmn_eV=lmn, b_eV=b_ev, d_eV=d_ev,
                                 internal_strain_zeta=zeta, internal_strain_source=zeta_source)


def _xi_u(material: Material, model: PlaneWaveModel, cond: EdgeLocation,
          rotations: np.ndarray | None, zeta: float = 0.0) -> float | None:
    """Ξ_u = (δ1 − δ2)/(1 − (k̂1·k̂2)²) under the uniaxial strain ε = k̂1 k̂1ᵀ along the valley
    k1, δ2 the shift of an equivalent valley k2 (E shifts by Ξ_d tr ε + Ξ_u k̂·ε·k̂;
    Herring & Vogt, Phys. Rev. 101, 944 (1956))."""
    k1 = cond.k_cart_invA
    if np.linalg.norm(k1) < 1e-9 or rotations is None:
        return None
    u1 = k1 / np.linalg.norm(k1)
    k2 = None
    for r in rotations:
        cand = (cond.k_frac @ np.linalg.inv(r)) @ model.reciprocal_invA
        u2 = cand / np.linalg.norm(cand)
        if abs(u1 @ u2) < 0.9:
            k2 = cand
            break
    if k2 is None:
        return None
    u2 = k2 / np.linalg.norm(k2)
    strain = np.outer(u1, u1)
    cutoff = model.basis.cutoff_eV
    shifts = []
    for k in (k1, k2):
        sym = centred_model(material, k, cutoff)
        shifts.append(float(np.mean(set_shifts(material, sym, k, np.array([cond.band]),
                                               [strain], zeta=zeta)[0])))
    return (shifts[0] - shifts[1]) / (1.0 - (u1 @ u2) ** 2)


def describe(dp: DeformationPotentials) -> list[str]:
    """Lines for a terminal: each potential with its name and unit."""
    lines = [f"dEg/d ln V ({name} gap): {v:+.3f} eV" for name, v in dp.gap_hydrostatic_eV.items()]
    if dp.xi_u_eV is not None:
        lines.append(f"Ξ_u of the conduction valleys ({dp.conduction_valley}): "
                     f"{dp.xi_u_eV:+.3f} eV")
    lines.append(f"Ξ_d + Ξ_u/3 − a_v: {dp.xi_d_plus_xi_u_over_3_minus_a_v_eV:+.3f} eV")
    if dp.b_eV is not None:
        lines.append(f"valence top b = (l − m)/3: {dp.b_eV:+.3f} eV, d = n/√3: {dp.d_eV:+.3f} eV "
                     f"(internal strain ζ = {dp.internal_strain_zeta:.2f})")
    return lines


# --------------------------------------------------------------------------------------------
# a continuous v(q) whose slopes follow measured deformation potentials
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class GapTarget:
    """A measured hydrostatic gap deformation potential dE_g/d ln V (eV).

    ``gap`` is "indirect" (conduction minimum − valence maximum) or a point label ("Γ")."""

    gap: str
    value_eV: float
    source: str


#: Measured hydrostatic gap deformation potentials, by the sorted species names of a file.
MEASURED_GAP_POTENTIALS: dict[tuple[str, ...], tuple[GapTarget, ...]] = {
    # dEg/dP = −1.41 meV/kbar times the bulk modulus 0.98 Mbar
    ("Si",): (GapTarget("indirect", 1.38, "Welber, Kim, Cardona & Rodriguez, Solid State "
                        "Commun. 17, 1021 (1975), dEg/dP = −1.41 meV/kbar, with B = 0.98 Mbar; "
                        "from memory"),),
    ("As", "Ga"): (GapTarget("Γ", -8.33, "Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, "
                             "5815 (2001), a = a_c − a_v of GaAs; from memory"),),
}


def _shell_index(model: PlaneWaveModel, unit_invA: float, shells_g2: list[float]) -> np.ndarray:
    diff = model.basis.miller[:, None, :] - model.basis.miller[None, :, :]
    g = diff @ model.reciprocal_invA
    g2 = np.round(np.einsum("...i,...i->...", g, g) / unit_invA**2, 6)
    out = np.full(g2.shape, -1)
    for i, s in enumerate(shells_g2):
        out[np.isclose(g2, s, rtol=0, atol=1e-5)] = i
    return out


def gap_condition(material: Material, cutoff_eV: float, target: GapTarget,
                  edges: list[EdgeLocation], shells_g2: list[float]) -> SlopeCondition:
    """The linear condition on the shell slopes that makes a gap's dE_g/d ln V equal a target.

    ``material`` is continuous and equal to the tabulated model at the reference lattice (so
    its eigenstates are the tabulated ones); the response is computed with each slope u_s′ on
    each shell set to 1 in turn (:func:`strain_hamiltonian` with ``slopes``).
    """
    b = reciprocal_vectors(material.vectors_A)
    n_val = material.valence_electrons // 2
    if target.gap == "indirect":
        cond = next(e for e in edges if not e.maximum)
        val = next(e for e in edges if e.maximum)
        where = [(cond.k_cart_invA, cond.band, 1.0), (val.k_cart_invA, val.band, -1.0)]
    else:
        k = np.zeros(3) if target.gap == "Γ" else np.asarray(material.path.points[target.gap])
        k = np.asarray(k, dtype=float) @ b if target.gap != "Γ" else k
        where = [(k, n_val, 1.0), (k, n_val - 1, -1.0)]
    unit = 2.0 * np.pi / material.a_A
    species = sorted({a.species for a in material.atoms})
    keys = [(s, i) for s in species for i in range(len(shells_g2))]
    total = np.zeros(len(keys) + 1)
    for k, band, sign in where:
        sym = centred_model(material, k, cutoff_eV)
        group = degenerate_group(material, sym, k, band, sym)[0]
        shell_of = _shell_index(sym, unit, shells_g2)
        for j, slopes in enumerate([{}] + [{key: 1.0} for key in keys]):
            shift = set_shifts(material, sym, k, group, [_hydrostatic(3)], slopes=slopes,
                               shell_of=shell_of)[0]
            total[j] += sign * float(np.mean(shift))
    coefficients = {(s, round(float(shells_g2[i]), 6)): float(total[j + 1] - total[0])
                    for j, (s, i) in enumerate(keys)}
    return SlopeCondition(name=f"dEg/d ln V ({target.gap} gap)", target_eV=target.value_eV,
                          constant_eV=float(total[0]), coefficients=coefficients,
                          source=target.source)


@dataclass(frozen=True)
class StrainFit:
    """The continuous v(q) a strained crystal uses, and how its slopes were fixed.

    Attributes
    ----------
    document : dict
        The material document with the fitted "continuous" potential.
    fit : ContinuousFit
    constrained : bool
        True when the measured gap deformation potentials are conditions of the fit (met
        exactly, with the tabulated form factors still exact at the reference lattice).
    targets : tuple of GapTarget
        The measured values known for this crystal (may be empty).
    achieved_eV : dict
        Gap → the model's dE_g/d ln V with the fit used.
    note : str
        One sentence for every output.
    """

    document: dict[str, Any]
    fit: ContinuousFit
    constrained: bool
    targets: tuple[GapTarget, ...]
    achieved_eV: dict[str, float]
    note: str


def _condition_value(cond: SlopeCondition, fit: ContinuousFit, a_A: float) -> float:
    unit = 2.0 * np.pi / a_A
    return cond.constant_eV + sum(
        c * float(continuous_form_factor_slope(
            unit * np.sqrt(g2), fit.species[s].a1_eV, fit.species[s].a2_invA2,
            fit.species[s].a3, fit.species[s].a4_A2))
        for (s, g2), c in cond.coefficients.items())


def strain_following_document(document: dict[str, Any], source: str = "",
                              cutoff_eV: float | None = None) -> StrainFit:
    """Replace tabulated form factors by a continuous v(q) whose slopes follow measured strain.

    The tabulated values fix v only on the shells; the slopes there decide every deformation
    potential. Where :data:`MEASURED_GAP_POTENTIALS` knows the crystal, its measured hydrostatic
    gap deformation potentials are added as conditions of the fit
    (:func:`bandpert.planewave.formfactor.fit_continuous_potential` with
    :class:`~bandpert.planewave.formfactor.SlopeCondition` rows; with two species a3 is no longer
    shared, one more unknown for the extra condition). The constrained fit is used only if it
    meets every condition and keeps the tabulated V(G) exact (1e-9 eV); otherwise the
    unconstrained fit is used and the note says by how much the target is missed.
    """
    material = parse_material(document, source)
    fit0 = fit_continuous_potential(material)
    doc0 = copy.deepcopy(document)
    doc0["potential"] = fit0.potential_table()
    doc0["source"] = (f"{document.get('source', '')}; continuous form factors v(q) of Friedel, "
                      "Hybertsen & Schlüter, Phys. Rev. B 39, 7974 (1989) fitted to them by "
                      "bandpert")
    species = tuple(sorted({a.species for a in material.atoms}))
    targets = MEASURED_GAP_POTENTIALS.get(species, ())
    if not targets:
        return StrainFit(doc0, fit0, False, (), {}, "no measured deformation potential is "
                         "known to bandpert for this crystal: the slopes of v(q) at the shells "
                         "come from the functional form alone")
    cmat = parse_material(doc0, source)
    cutoff = choose_cutoff(material, default_bands(material), cutoff_eV, check_convergence=False)
    with single_blas_thread():
        bs = compute_band_structure(cmat, n_k=60, cutoff_eV=cutoff, check_cutoff=False)
        edges = locate_edges(bs)
        shells = sorted(fit0.residuals_eV)
        conds = tuple(gap_condition(cmat, cutoff, t, edges, shells) for t in targets)
    shared = fit0.shared if len(species) == 1 else ()
    fit1 = fit_continuous_potential(material, shared=shared, slope_conditions=conds,
                                    start=fit0)
    ok = fit1.max_residual_eV < 1e-9 and all(abs(x) < 1e-6
                                             for x in fit1.slope_residuals_eV.values())
    said = "; ".join(f"{t.gap} gap {t.value_eV:+.2f} eV ({t.source})" for t in targets)
    if ok:
        doc1 = copy.deepcopy(doc0)
        doc1["potential"] = fit1.potential_table()
        achieved = {t.gap: _condition_value(c, fit1, material.a_A)
                    for t, c in zip(targets, conds, strict=True)}
        return StrainFit(doc1, fit1, True, targets, achieved,
                         f"slopes of v(q) fixed by the measured dEg/d ln V: {said}")
    achieved = {t.gap: _condition_value(c, fit0, material.a_A)
                for t, c in zip(targets, conds, strict=True)}
    best = ", ".join(f"{t.gap} {fit1.slope_residuals_eV[c.name] + t.value_eV:+.2f} eV with "
                     f"|ΔV(G)| up to {fit1.max_residual_eV:.1e} eV"
                     for t, c in zip(targets, conds, strict=True))
    got = ", ".join(f"{g} {v:+.2f} eV" for g, v in achieved.items())
    return StrainFit(doc0, fit0, False, targets, achieved,
                     f"the measured dEg/d ln V ({said}) cannot be met by this form of v(q) while "
                     f"the tabulated form factors stay exact (closest constrained fit: {best}); "
                     f"the unconstrained fit is used and gives {got}")


def material_deformation_potentials(material: Material, document: dict[str, Any], bs,
                                    edges: list[EdgeLocation]
                                    ) -> tuple[DeformationPotentials, str]:
    """Deformation potentials of a bundled-style semiconductor at its reference lattice.

    Tabulated form factors are replaced first by the strain-following continuous v(q)
    (:func:`strain_following_document`), equal to them at the reference lattice, so the bands
    and ``edges`` of ``bs`` still hold. Gaps are reported at Γ, X and L where the path has them.

    Returns
    -------
    DeformationPotentials
    note : str
        How v(q) follows the strain (said in every output).
    """
    if material.potential.form == "continuous":
        cmat, note = material, "the file's continuous v(q) follows the strain"
    else:
        sf = strain_following_document(document, material.file, bs.model.basis.cutoff_eV)
        try:
            cmat, note = parse_material(sf.document, material.file), sf.note
        except InputError as exc:
            raise InputError(f"the continuous v(q) fitted to these form factors for the "
                             f"deformation potentials is unusable ({exc.problem}); expected "
                             "tabulated form factors that a smooth decaying v(q) can follow",
                             material.file, "potential") from None
    points = {p: np.asarray(bs.path.points_frac[p]) for p in ("Γ", "X", "L")
              if p in bs.path.points_frac}
    with single_blas_thread():
        dp = deformation_potentials(cmat, bs.model, edges, points, point_group_rotations(cmat))
    return dp, note
