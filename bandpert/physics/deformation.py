"""Deformation potentials: how band energies move under a homogeneous strain.

First-order strain perturbation theory on the plane-wave eigenstates. With the atoms at fixed
fractional positions and k fixed in reciprocal fractions, a strain ε changes
H(k)_{GG'} = βC|k + G|² δ_{GG'} + V(G − G') (β the kinetic factor) by

    ∂H/∂ε_ij = −2βC (k + G)_i (k + G)_j δ_{GG'} + ∂V(G − G')/∂ε_ij,

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
reference lattice, with its slopes at the shells fitted to the measured deformation potentials
the material file gives (:mod:`bandpert.physics.deformation_fit`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..input.material import Material
from ..physics.critical_points import centred_model, degenerate_group
from ..physics.extrema import EdgeLocation, levels
from ..physics.internal_strain import (
    internal_displacements,
    internal_strain_parameter,
    internal_strain_potential,
)
from ..planewave.model import PlaneWaveModel
from ..planewave.strain_potential import (
    strain_derivative_of_potential,
)

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


def _slopes_by_shell(material: Material, g_diff: np.ndarray,
                     slopes: dict[tuple[str, float], float]
                     ) -> tuple[dict[tuple[str, int], float], np.ndarray]:
    """(species, |G|² in (2π/a)²) → slope, as (species, shell index) and the index of each G."""
    unit = 2.0 * np.pi / material.a_A
    g2 = np.einsum("...i,...i->...", g_diff, g_diff) / unit**2
    shells = sorted({g for _, g in slopes})
    shell_of = np.full(g2.shape, -1)
    for i, s in enumerate(shells):
        shell_of[np.abs(g2 - s) <= 1e-6 * max(s, 1.0)] = i
    return {(sp, shells.index(g)): v for (sp, g), v in slopes.items()}, shell_of


def strain_hamiltonian(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray,
                       strain: np.ndarray, slopes: dict[tuple[str, float], float] | None = None,
                       zeta: float = 0.0) -> np.ndarray:
    """Σ_ij ε_ij ∂H(k)/∂ε_ij on the model's basis (eV; module docstring).

    ``slopes``: (species, shell |G|² in (2π/a)²) → u′ (eV·Å) to use instead of the model's own
    slopes (every other G gets slope 0); the response is linear in them, which is how
    :mod:`bandpert.physics.deformation_fit` builds its conditions.
    ``zeta`` is Kleinman's internal-strain parameter: the shift of the atoms under a shear
    (:mod:`bandpert.physics.internal_strain`) adds its δV(G).
    """
    eps = np.asarray(strain, dtype=float)
    kg = np.asarray(k_cart_invA, dtype=float)[None, :] + model.basis.g_cart_invA
    diff = model.basis.miller[:, None, :] - model.basis.miller[None, :, :]
    g_diff = diff @ model.reciprocal_invA
    by_index, shell_of = (None, None) if slopes is None else _slopes_by_shell(material, g_diff,
                                                                              slopes)
    dv = strain_derivative_of_potential(material, g_diff, eps, by_index, shell_of)
    moves = internal_displacements(material, eps, zeta)
    if np.any(moves):
        dv = dv + internal_strain_potential(material, g_diff, moves)
    h = dv.real if model.is_real else dv
    h = np.array(h, copy=True)
    idx = np.arange(model.size)
    h[idx, idx] += -2.0 * model.kinetic_constant_eV_A2 * np.einsum("gi,ij,gj->g", kg, eps, kg)
    return h


#: One set of shell slopes for :func:`strain_hamiltonian` (None: the model's own).
Slopes = dict[tuple[str, float], float] | None


def set_shifts(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray,
               bands: np.ndarray, strains: list[np.ndarray], slopes: Slopes = None,
               zeta: float = 0.0) -> list[np.ndarray]:
    """Ascending first-order shifts of a (degenerate) set of bands at k per unit of each strain.

    Eigenvalues of P (Σ ε_ij ∂H/∂ε_ij) P in the set (degenerate first-order perturbation
    theory), on ``model`` (one basis for every strain).
    """
    return _shift_sets(material, model, k_cart_invA, bands, strains, [slopes], zeta)[0]


def _shift_sets(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray,
                bands: np.ndarray, strains: list[np.ndarray], slope_sets: list[Slopes],
                zeta: float = 0.0) -> list[list[np.ndarray]]:
    """:func:`set_shifts` for several slope sets on one set of eigenstates: [set][strain]."""
    k = np.asarray(k_cart_invA, dtype=float)
    c = levels(model, k, int(np.max(bands)) + 1)[1][:, bands]
    return [[np.linalg.eigvalsh(c.conj().T @ strain_hamiltonian(material, model, k, e, slopes,
                                                                zeta) @ c)
             for e in strains] for slopes in slope_sets]


def _single_and_double(w: np.ndarray) -> tuple[float, float]:
    w = np.sort(w)
    if abs(w[1] - w[0]) < abs(w[2] - w[1]):
        return float(w[2]), float(0.5 * (w[0] + w[1]))
    return float(w[0]), float(0.5 * (w[1] + w[2]))


def _hydrostatic_shift(material: Material, k: np.ndarray, band: int, cutoff_eV: float,
                       run_model: PlaneWaveModel, slope_sets: list[Slopes]) -> np.ndarray:
    """Mean hydrostatic shift (per ln V) of the degenerate set holding ``band`` at k, per set."""
    sym = centred_model(material, k, cutoff_eV)
    group = degenerate_group(material, run_model, k, band, sym)[0]
    return np.array([float(np.mean(w[0])) for w in _shift_sets(
        material, sym, k, group, [_hydrostatic(k.size)], slope_sets)])


def deformation_potentials(material: Material, model: PlaneWaveModel,
                           edges: list[EdgeLocation], points: dict[str, np.ndarray],
                           rotations: np.ndarray | None, slopes: Slopes = None
                           ) -> DeformationPotentials:
    """Hydrostatic, uniaxial and shear deformation potentials at the reference lattice.

    Parameters
    ----------
    material : Material
        A 3D semiconductor with a "continuous" potential (use
        :func:`bandpert.physics.deformation_fit.strain_following_document` for tabulated form
        factors).
    model : PlaneWaveModel
        Its model at the run's cutoff (the centred bases use the same cutoff).
    edges : list of EdgeLocation
        Conduction minimum and valence maximum (:func:`bandpert.physics.extrema.locate_edges`).
    points : dict
        Label → fractional k of the labelled points whose gaps to report.
    rotations : numpy.ndarray or None
        Point group (spglib, fractional direct) to find a second conduction valley.
    slopes : dict, optional
        Shell slopes to use instead of the model's own (:func:`strain_hamiltonian`).

    Raises
    ------
    InputError
        For a potential that is not "continuous" or a lattice that is not 3D.
    """
    return deformation_potential_sets(material, model, edges, points, rotations, [slopes])[0]


def deformation_potential_sets(material: Material, model: PlaneWaveModel,
                               edges: list[EdgeLocation], points: dict[str, np.ndarray],
                               rotations: np.ndarray | None, slope_sets: list[Slopes]
                               ) -> list[DeformationPotentials]:
    """:func:`deformation_potentials` for each of several slope sets, on one set of eigenstates.

    The eigenstates at the reference lattice do not depend on the slopes, so each degenerate
    set is found and diagonalised once (:mod:`bandpert.physics.deformation_fit` evaluates one
    set per shell slope).
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
    sets = list(slope_sets)
    gaps = {"indirect": (_hydrostatic_shift(material, cond.k_cart_invA, cond.band, cutoff, model,
                                            sets)
                         - _hydrostatic_shift(material, val.k_cart_invA, val.band, cutoff,
                                              model, sets))}
    for label, k_frac in points.items():
        k = np.asarray(k_frac, dtype=float) @ b
        gaps[label] = (_hydrostatic_shift(material, k, n_val, cutoff, model, sets)
                       - _hydrostatic_shift(material, k, n_val - 1, cutoff, model, sets))
    zeta, zeta_source = internal_strain_parameter(material)
    xi_u = _xi_u(material, model, cond, rotations, zeta, sets)
    lmn = [None] * len(sets)
    k_v = val.k_cart_invA
    sym = centred_model(material, k_v, cutoff)
    group = degenerate_group(material, model, k_v, val.band, sym)[0]
    if group.size == 3:
        ex = np.zeros((3, 3))
        ex[0, 0] = 1.0
        for i, (uni, shear) in enumerate(_shift_sets(
                material, sym, k_v, group, [ex, np.full((3, 3), 1.0 / 3.0)], sets, zeta)):
            big_l, big_m = _single_and_double(uni)
            single, double = _single_and_double(shear)
            lmn[i] = (big_l, big_m, single - double)
    return [DeformationPotentials(
        gap_hydrostatic_eV={k: float(v[i]) for k, v in gaps.items()},
        conduction_valley=cond.where, xi_u_eV=xi_u[i],
        xi_d_plus_xi_u_over_3_minus_a_v_eV=float(gaps["indirect"][i]), valence_lmn_eV=lmn[i],
        b_eV=None if lmn[i] is None else (lmn[i][0] - lmn[i][1]) / 3.0,
        d_eV=None if lmn[i] is None else lmn[i][2] / np.sqrt(3.0),
        internal_strain_zeta=zeta, internal_strain_source=zeta_source)
        for i in range(len(sets))]


def _xi_u(material: Material, model: PlaneWaveModel, cond: EdgeLocation,
          rotations: np.ndarray | None, zeta: float, slope_sets: list[Slopes]
          ) -> list[float | None]:
    """Ξ_u = (δ1 − δ2)/(1 − (k̂1·k̂2)²) under the uniaxial strain ε = k̂1 k̂1ᵀ along the valley
    k1, δ2 the shift of an equivalent valley k2 (E shifts by Ξ_d tr ε + Ξ_u k̂·ε·k̂;
    Herring & Vogt, Phys. Rev. 101, 944 (1956))."""
    k1 = cond.k_cart_invA
    if np.linalg.norm(k1) < 1e-9 or rotations is None:
        return [None] * len(slope_sets)
    u1 = k1 / np.linalg.norm(k1)
    k2 = None
    for r in rotations:
        cand = (cond.k_frac @ np.linalg.inv(r)) @ model.reciprocal_invA
        u2 = cand / np.linalg.norm(cand)
        if abs(u1 @ u2) < 0.9:
            k2 = cand
            break
    if k2 is None:
        return [None] * len(slope_sets)
    u2 = k2 / np.linalg.norm(k2)
    strain = np.outer(u1, u1)
    cutoff = model.basis.cutoff_eV
    shifts = []
    for k in (k1, k2):
        sym = centred_model(material, k, cutoff)
        shifts.append(np.array([float(np.mean(w[0])) for w in _shift_sets(
            material, sym, k, np.array([cond.band]), [strain], slope_sets, zeta)]))
    return [float(x) for x in (shifts[0] - shifts[1]) / (1.0 - (u1 @ u2) ** 2)]


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
