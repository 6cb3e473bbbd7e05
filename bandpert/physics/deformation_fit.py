"""A continuous v(q) whose slopes at the shells follow measured deformation potentials.

Tabulated form factors fix v(q) only on the reference shells; the continuous form of
:mod:`bandpert.planewave.formfactor` (Friedel, Hybertsen & Schlüter 1989) fitted to them leaves
the slopes v′(|G_k|) to its functional form, and every deformation potential depends on those
slopes (:mod:`bandpert.planewave.strain_potential`). For silicon that form gives the indirect
gap's dE_g/d ln V with the wrong sign. This module fixes the slopes by the measured deformation
potentials a material file lists under ``[potential.deformation_targets]`` (each with its
source):

1. fit the continuous form to the tabulated values (exact at the reference lattice);
2. at the reference lattice the eigenstates do not depend on the slopes, and every deformation
   potential R_t (hydrostatic gap potentials, Ξ_u, b, d, internal strain included) is
   exactly linear in the shell slopes u′_k: R_t = R_t(0) + Σ_k A_tk u′_k. A_tk is computed by
   setting one slope to 1 at a time (:func:`bandpert.physics.deformation.deformation_potentials`
   with ``slopes``);
3. choose the slope changes δ_k by Tikhonov-regularised least squares, each target weighted by
   1/uncertainty (:func:`bandpert.planewave.slope_form.regularised_slope_changes`), and add them
   as slope corrections that vanish at every lattice shell
   (:mod:`bandpert.planewave.slope_form`): the tabulated V(G) stay exact;
4. recompute every deformation potential with the corrected form (a linearity check).
"""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..crystal.lattice import point_group_rotations, reciprocal_vectors
from ..errors import InputError
from ..input.material import Material, parse_material
from ..input.potential_input import DeformationTarget
from ..planewave.basis import plane_wave_basis
from ..planewave.cutoff import choose_cutoff
from ..planewave.formfactor import ContinuousFit, fit_continuous_potential, with_kinetic_factor
from ..planewave.potential import fourier_coefficients
from ..planewave.slope_form import regularised_slope_changes, shell_half_widths
from ..planewave.solver import single_blas_thread
from ..planewave.strain_potential import species_form_factor_slope
from ..units import ENERGY_UNITS_TO_EV, HBAR2_OVER_2M0_EV_A2
from .bands import compute_band_structure, default_bands
from .deformation import (
    DeformationPotentials,
    deformation_potential_sets,
    deformation_potentials,
)
from .extrema import EdgeLocation, locate_edges

#: Labelled points whose gaps are reported (and may be targets).
GAP_POINTS = ("Γ", "X", "L")

#: Target name → the gap label of :attr:`DeformationPotentials.gap_hydrostatic_eV`.
_GAP_OF = {"indirect_gap": "indirect", "gamma_gap": "Γ", "x_gap": "X", "l_gap": "L"}

#: Largest |ΔV(G)| (eV) at the reference lattice a corrected form may have: the corrections
#: vanish there exactly, so this is rounding.
EXACT_EV = 1e-9

#: Largest difference (eV) between a deformation potential predicted by the linear conditions
#: and recomputed with the corrected form.
LINEARITY_EV = 1e-6


def target_value(dp: DeformationPotentials, name: str) -> float | None:
    """The deformation potential a target names, or None if the crystal has none."""
    if name in _GAP_OF:
        return dp.gap_hydrostatic_eV.get(_GAP_OF[name])
    return {"xi_u": dp.xi_u_eV, "b": dp.b_eV, "d": dp.d_eV}[name]


@dataclass(frozen=True)
class StrainFit:
    """The continuous v(q) a strained crystal uses, and how its slopes were fixed.

    Attributes
    ----------
    document : dict
        The material document with the fitted "continuous" potential.
    fit : ContinuousFit
        The functional-form fit (before slope corrections).
    targets : tuple of DeformationTarget
        The measured values of the file (may be empty).
    before_eV, achieved_eV : dict
        Target name → the model's value with the form's own slopes, and with the fitted ones.
    slope_changes_eV_A : dict
        (species, shell |G|² in (2π/a)²) → δ, the change of dv/dq at the shell (eV·Å).
    max_delta_v_eV : float
        Largest |V(G) − V_tabulated(G)| at the reference lattice, corrections included.
    note : str
        One sentence for every output.
    """

    document: dict[str, Any]
    fit: ContinuousFit
    targets: tuple[DeformationTarget, ...]
    before_eV: dict[str, float]
    achieved_eV: dict[str, float]
    slope_changes_eV_A: dict[tuple[str, float], float]
    max_delta_v_eV: float
    note: str


def _responses(material: Material, bs, edges: list[EdgeLocation],
               targets: tuple[DeformationTarget, ...], slope_sets: list) -> np.ndarray:
    """Each target's value for each slope set: (n_sets, n_targets)."""
    points = {p: np.asarray(bs.path.points_frac[p]) for p in GAP_POINTS
              if p in bs.path.points_frac}
    return np.array([_values(material, dp, targets) for dp in deformation_potential_sets(
        material, bs.model, edges, points, point_group_rotations(material), slope_sets)])


def _values(material: Material, dp: DeformationPotentials,
            targets: tuple[DeformationTarget, ...]) -> list[float]:
    out = []
    for t in targets:
        v = target_value(dp, t.name)
        if v is None:
            raise InputError(f"this crystal has no such deformation potential (conduction "
                             f"valley {dp.conduction_valley}, valence top of "
                             f"{'three' if dp.b_eV is not None else 'other than three'} "
                             "states, or the gap's point is not on the path); expected targets "
                             "the crystal has", material.file,
                             f"potential.deformation_targets.{t.name}")
        if t.name == "d" and dp.internal_strain_zeta == 0.0:
            raise InputError("d is a shear potential and needs the internal strain, and no "
                             "measured ζ is known for this crystal (the atoms would keep their "
                             "fractional positions); expected no d target",
                             material.file, "potential.deformation_targets.d")
        out.append(v)
    return out


def _slope_keys(fit: ContinuousFit, species: list[str]) -> list[tuple[str, float]]:
    return [(s, round(float(g2), 6)) for s in species for g2 in sorted(fit.residuals_eV)]


def strain_following_document(document: dict[str, Any], source: str = "",
                              cutoff_eV: float | None = None) -> StrainFit:
    """Replace tabulated form factors by a continuous v(q) whose slopes follow measured strain.

    Module docstring for the steps. Without ``[potential.deformation_targets]`` the slopes are
    the functional form's own and the note says so.

    Parameters
    ----------
    document : dict
        A material document with tabulated form factors.
    source : str
        Its file name (messages).
    cutoff_eV : float, optional
        Plane-wave cutoff of the responses (default: the run's rule).

    Raises
    ------
    InputError
        Naming ``potential.deformation_targets.<name>`` for a target the crystal does not
        have, and the usual errors of the fit.
    """
    material = parse_material(document, source)
    fit0 = fit_continuous_potential(material)
    doc0 = copy.deepcopy(document)
    doc0["potential"] = with_kinetic_factor(fit0.potential_table(), document)
    doc0["source"] = (f"{document.get('source', '')}; continuous form factors v(q) of Friedel, "
                      "Hybertsen & Schlüter, Phys. Rev. B 39, 7974 (1989) fitted to them by "
                      "bandpert")
    targets = material.potential.deformation_targets
    if not targets:
        return StrainFit(doc0, fit0, (), {}, {}, {}, fit0.max_residual_eV,
                         "the file gives no measured deformation potentials "
                         "([potential.deformation_targets]): the slopes of v(q) at the shells "
                         "come from the functional form alone")
    if material.dimension != 3 or not material.valence_electrons \
            or material.valence_electrons % 2:
        raise InputError("deformation targets need a 3D semiconductor (an even "
                         "electrons.valence)", source, "potential.deformation_targets")
    cmat = parse_material(doc0, source)
    cutoff = choose_cutoff(material, default_bands(material), cutoff_eV, check_convergence=False)
    species = sorted(fit0.species)
    keys = _slope_keys(fit0, species)
    unit = 2.0 * np.pi / material.a_A
    with single_blas_thread():
        bs = compute_band_structure(cmat, n_k=60, cutoff_eV=cutoff, check_cutoff=False)
        edges = locate_edges(bs)
        before, base, *unit_slope = _responses(cmat, bs, edges, targets,
                                               [None, {}] + [{key: 1.0} for key in keys])
        a = np.stack(unit_slope, axis=1) - base[:, None]
    own = np.array([float(species_form_factor_slope(cmat, s, unit * np.sqrt(g2)))
                    for s, g2 in keys])
    live = np.abs(a).max(axis=0) > 1e-9 * max(1.0, float(np.abs(a).max()))
    goal = np.array([t.value_eV for t in targets])
    sigma = np.array([t.uncertainty_eV for t in targets])
    delta = np.zeros(len(keys))
    delta[live] = regularised_slope_changes(a[:, live], goal - before, sigma)
    predicted = base + a @ (own + delta)
    doc1 = copy.deepcopy(doc0)
    doc1["potential"] = with_kinetic_factor(_with_corrections(fit0, keys, delta, material),
                                            document)
    fitted = parse_material(doc1, source)
    dv = _max_delta_v(fitted, material)
    if dv > EXACT_EV:
        raise AssertionError(f"slope corrections changed V(G) at the reference lattice by {dv}")
    with single_blas_thread():
        achieved = _responses(fitted, bs, edges, targets, [None])[0]
    if np.max(np.abs(achieved - predicted)) > LINEARITY_EV:
        raise AssertionError("deformation potentials are not linear in the shell slopes: "
                             f"predicted {predicted}, recomputed {achieved}")
    said = "; ".join(f"{t.name} {x:+.2f} eV (was {b:+.2f}; measured {t.value_eV:+.2f} ± "
                     f"{t.uncertainty_eV:.2f}, {t.source})"
                     for t, x, b in zip(targets, achieved, before, strict=True))
    note = ("slopes of v(q) at the shells fitted by regularised least squares to the measured "
            f"deformation potentials of the file, the tabulated V(G) kept exact: {said}")
    return StrainFit(doc1, fit0, targets,
                     {t.name: float(x) for t, x in zip(targets, before, strict=True)},
                     {t.name: float(x) for t, x in zip(targets, achieved, strict=True)},
                     {k: float(d) for k, d, ok in zip(keys, delta, live, strict=True) if ok},
                     dv, note)


def _with_corrections(fit: ContinuousFit, keys: list[tuple[str, float]], delta: np.ndarray,
                      material: Material) -> dict[str, Any]:
    """The fit's potential table with the slope-correction keys of each species."""
    table = fit.potential_table()
    unit = 2.0 * np.pi / material.a_A
    g2s = sorted(fit.residuals_eV)
    q = unit * np.sqrt(np.array(g2s))
    widths = shell_half_widths(q, unit * np.sqrt(max(material.potential.shells_g2)))
    to_unit = 1.0 / ENERGY_UNITS_TO_EV[table["unit"]]
    for s in sorted(fit.species):
        rows = [(float(q[i]), float(widths[i]), float(d * to_unit))
                for i, g2 in enumerate(g2s)
                for (sp, key_g2), d in zip(keys, delta, strict=True)
                if sp == s and key_g2 == round(float(g2), 6) and d != 0.0]
        if rows:
            c, h, d = zip(*rows, strict=True)
            table["species"][s].update({"slope_shells_invA": list(c),
                                        "slope_half_widths_invA": list(h),
                                        "slope_changes": list(d)})
    return table


def _max_delta_v(fitted: Material, tabulated: Material) -> float:
    """max |V_fitted(G) − V_tabulated(G)| over every G up to twice the last listed shell."""
    q_last = 2.0 * np.pi / tabulated.a_A * np.sqrt(max(tabulated.potential.shells_g2))
    basis = plane_wave_basis(reciprocal_vectors(tabulated.vectors_A),
                             HBAR2_OVER_2M0_EV_A2 * (2.0 * q_last) ** 2)
    return float(np.max(np.abs(fourier_coefficients(fitted, basis.miller)
                               - fourier_coefficients(tabulated, basis.miller))))


def material_deformation_potentials(material: Material, document: dict[str, Any], bs,
                                    edges: list[EdgeLocation]
                                    ) -> tuple[DeformationPotentials, str]:
    """Deformation potentials of a semiconductor at its reference lattice.

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
    points = {p: np.asarray(bs.path.points_frac[p]) for p in GAP_POINTS
              if p in bs.path.points_frac}
    with single_blas_thread():
        dp = deformation_potentials(cmat, bs.model, edges, points, point_group_rotations(cmat))
    return dp, note
