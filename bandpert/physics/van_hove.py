"""Van Hove critical points at the labelled points of a path: M0, M1, M2, M3 per level.

A band E_n(k) at a point where ∇E = 0 is a critical point of the density of states of type
M_i, i the number of principal directions along which it curves down (van Hove, Phys. Rev. 89,
1189 (1953); Morse index): M0 a minimum, M3 a maximum (in 3D), M1 and M2 saddles. The fast path
here uses the one eigen-decomposition of H(k) at the point in the basis
{G : ħ²|k+G|²/2m0 ≤ cutoff} centred on k (:func:`bandpert.symmetry.labels.k_centred_states`),
which the irreducible-representation labels use too, so classifying adds no diagonalisation:

- **non-degenerate level**: the Hessian of the band in that fixed basis by second-order
  perturbation theory in q = k − k0 (the k·p sum over states; Kittel, *Quantum Theory of
  Solids*, 1963, ch. 9),

  ∂²E_n/∂k_i∂k_j = 2βC δ_ij + Σ_{m≠n} 2 Re[p_i^{nm} p_j^{mn}] / (E_n − E_m),
  p_i = ∂H/∂k_i = 2βC (k + G)_i δ_GG′, C = ħ²/2m0 (β the kinetic factor, 1 for the
  free-electron mass),

  exact for the basis because H(k0 + q) is quadratic in q; its eigenvalues / 2C are the signed
  principal m0/m*; its symmetrised form (1/|G_k|) Σ_R R H Rᵀ over the little co-group differs
  from it only by rounding (reported as ``symmetry_residual``);
- **degenerate level** (a multiplet of the little group): no band of it has a Hessian — the
  bands are not smooth functions of k there. If the multiplet splits linearly in q (q·p inside
  the set beyond its mean: the X1 pair of diamond) it is a **crossing**, not a critical point.
  Otherwise the second-order (Löwdin) block
  M_ij^{ab} = βC δ_ij δ_ab + ½ Σ_{m∉D} [p_i^{am} p_j^{mb} + p_j^{am} p_i^{mb}] / (E_D − E_m)
  gives each band of the set the curvature λ_a(u)/C along each unit u (its a-th eigenvalue of
  u_i u_j M_ij): a band curving up (down) along every one of 200 directions is classified M0
  (M3) *by the degenerate block*; mixed signs make it a saddle, of index 1 or 2 where the
  sign pattern on the sphere is a quadratic form's (two antipodal negative caps: index 1; two
  positive caps: index 2), else a **warped saddle** with no index (silicon's Γ15 lower band:
  4 negative and 8 positive regions) — the rule
  :func:`bandpert.physics.critical_points.curvature_kind`, which ``masses`` applies too;
- a level whose mean gradient |∇E| exceeds
  :data:`bandpert.physics.critical_points.STATIONARY_GRADIENT_EV_A` is **not stationary** (K and
  U of the fcc path lie on mirror planes only, where the gradient along the C2 axis may not
  vanish).

Spin–orbit and nonlocal terms depend on k themselves, so p_i = 2βC(k+G)_i misses part of
∂H/∂k and 2βC δ_ij part of ∂²H/∂k_i∂k_j. Those models (:func:`classify_k_dependent`) take
both from matrix differences of the model's own H(k) on the one basis centred on k
(:mod:`bandpert.physics.hamiltonian_derivatives`) and use the same sums with W_ij^{nn} in place
of 2βC δ_ij. With spin, every level of a crystal with inversion is at least a Kramers pair; a
twofold level whose second-order block is a multiple of 1₂ along every direction is one band
carried twice and gets the Hessian ∂²E/∂k_i∂k_j = tr M_ij (method ``"hessian"``, both bands
alike). Without inversion Kramers pairs split linearly in k at some points (Dresselhaus, Phys.
Rev. 100, 580 (1955)): such a level is a crossing, and the points carry
:data:`K_LINEAR_NOTE`. Where H(k) itself is not smooth at the point (the energy-dependent
nonlocal wells' √(E⁰(K)E⁰(K′)) ∝ |k + G| at k + G = 0: a cone b|k| in the band), the second
difference along e_a + e_b differs from what those along the axes and the mixed one predict
(:attr:`~bandpert.physics.hamiltonian_derivatives.HamiltonianDerivatives.kink_eV_A2`), no
Hessian exists, and the level is ``"non-analytic"``.
"""
from __future__ import annotations

import numpy as np
import scipy.linalg

from ..crystal.lattice import reciprocal_vectors
from ..input.material import Material
from ..planewave.model import (
    KCentredModel,
    PlaneWaveModel,
    build_k_centred_model,
    centred_model,
)
from ..planewave.solver import single_blas_thread
from ..symmetry import PointSymmetry, space_group_frame
from ..symmetry.labels import k_centred_states, label_point, unlabelled_reason
from .critical_points import LINEAR_SPLITTING_EV_A
from .hamiltonian_derivatives import MATRIX_STEP, HamiltonianDerivatives, hamiltonian_derivatives
from .van_hove_levels import (
    DIRECTIONS,
    KRAMERS_TOLERANCE,
    BandCriticalPoint,
    LevelCriticalPoint,
    PointCriticalPoints,
    classify_from_derivatives,
    classify_levels,
    sum_over_states_hessian,
)

__all__ = [
    "DIRECTIONS",
    "KINK_TOLERANCE",
    "K_LINEAR_NOTE",
    "KRAMERS_TOLERANCE",
    "BandCriticalPoint",
    "LevelCriticalPoint",
    "PointCriticalPoints",
    "classify_from_derivatives",
    "classify_k_dependent",
    "classify_levels",
    "label_and_classify",
    "sum_over_states_hessian",
]

#: A level is non-analytic where the kink measure of H(k) (second differences along e_a + e_b
#: against the axes', :attr:`~bandpert.physics.hamiltonian_derivatives.HamiltonianDerivatives
#: .kink_eV_A2`) exceeds this fraction of its curvature ⟨n|∂²H/∂k_a²|n⟩ (smooth terms leave
#: ~1e-7, a kink b|k| ~0.3).
KINK_TOLERANCE: float = 1e-3

def _little_cogroup_cart(rotations_cart: np.ndarray, reciprocal_invA: np.ndarray,
                         k_cart: np.ndarray) -> np.ndarray:
    """The Cartesian rotations R with R k ≡ k modulo the reciprocal lattice."""
    shift = np.einsum("rij,j->ri", rotations_cart, k_cart) - k_cart
    frac = np.linalg.solve(reciprocal_invA.T, shift.T).T
    return rotations_cart[np.all(np.abs(frac - np.rint(frac)) < 1e-6, axis=1)]


def not_classified_reason(material: Material) -> str:
    """Why the levels of a material are not classified (``""`` when they are): 1D and 2D."""
    if unlabelled_reason(material):
        return unlabelled_reason(material).replace("no labels", "no critical points")
    return ""


#: The remark on a spinor model of a crystal without inversion (``critical_points_note``).
K_LINEAR_NOTE: str = (
    "spin–orbit without inversion: Kramers pairs may split linearly in k (Dresselhaus 1955); "
    f"a level whose linear splitting exceeds {LINEAR_SPLITTING_EV_A:g} eV·Å is listed as a "
    "crossing, its bands non-analytic there, with no Hessian")


def classify_k_dependent(material: Material, cutoff_eV: float, k_cart_invA: np.ndarray,
                         levels: list[tuple[int, int]],
                         rotations_cart: np.ndarray | None = None
                         ) -> tuple[LevelCriticalPoint, ...]:
    """Classify the levels at k of a model with spin–orbit or nonlocal terms.

    H(k) is built by the model's own builder on the basis {G : ħ²|k+G|²/2m0 ≤ cutoff} centred
    on k (:func:`bandpert.planewave.model.centred_model`), fully diagonalised; ∂H/∂k and
    ∂²H/∂k∂k are its matrix differences on that one basis
    (:mod:`bandpert.physics.hamiltonian_derivatives`, step :data:`MATRIX_STEP`·2π/a), taken to
    the eigenbasis, and :func:`classify_from_derivatives` does the rest (a spinor model's
    twofold levels may be Kramers pairs).

    Parameters
    ----------
    material : Material
    cutoff_eV : float
    k_cart_invA : numpy.ndarray
        (3,) Cartesian k (Å⁻¹).
    levels : list of (int, int)
        (first band, degeneracy), e.g. of the labels at k.
    rotations_cart : numpy.ndarray, optional
        (r, d, d) the little co-group, for the symmetry residual.

    Returns
    -------
    tuple of LevelCriticalPoint
    """
    if not levels:
        return ()
    return _classify_states(_k_dependent_states(material, cutoff_eV, k_cart_invA), levels,
                            rotations_cart)


def _k_dependent_states(material: Material, cutoff_eV: float, k_cart_invA: np.ndarray
                        ) -> tuple[PlaneWaveModel, HamiltonianDerivatives, np.ndarray,
                                   np.ndarray]:
    """(model centred on k, its derivatives at k, every eigenvalue, every eigenvector)."""
    k = np.asarray(k_cart_invA, dtype=float)
    model = centred_model(material, cutoff_eV, k, spin_orbit=True)
    with single_blas_thread():  # small products: threads only contend
        der = hamiltonian_derivatives(model, k, MATRIX_STEP * 2.0 * np.pi / material.a_A)
        w, c = scipy.linalg.eigh(der.hamiltonian_eV, driver="evd", check_finite=False)
    return model, der, w, c


def _classify_states(states: tuple, levels: list[tuple[int, int]],
                     rotations_cart: np.ndarray | None) -> tuple[LevelCriticalPoint, ...]:
    """:func:`classify_from_derivatives` on the states of :func:`_k_dependent_states`."""
    if not levels:
        return ()
    model, der, w, c = states
    top = max(a + g for a, g in levels)
    with single_blas_thread():
        p = der.first_projected(c[:, :top], c)
        second = der.second_projected(c[:, :top], c[:, :top])
        kink = der.kink_projected(c[:, :top], c[:, :top])
    smooth = [(a, g) for a, g in levels
              if np.max(np.abs(kink[:, a:a + g, a:a + g]), initial=0.0) <= KINK_TOLERANCE * max(
                  1.0, float(np.max(np.abs(np.einsum("iiab->iab", second[:, :, a:a + g,
                                                                        a:a + g])))))]
    done = {lv.first_band: lv for lv in classify_from_derivatives(
        w, p, second, smooth, rotations_cart, kramers=model.n_components == 2)}
    return tuple(done.get(a) or _non_analytic(w, p, a, g) for a, g in levels)


def _non_analytic(w: np.ndarray, p: np.ndarray, first: int, degeneracy: int
                  ) -> LevelCriticalPoint:
    """A level where H(k) itself has a kink: no Hessian, no classification (gradient and
    linear splitting from the central differences, which a kink b|k| leaves out)."""
    group = slice(first, first + degeneracy)
    inner = p[:, group, group]
    mean = np.mean(np.real(np.einsum("inn->in", inner)), axis=1)
    linear = float(np.max(np.abs(inner - np.eye(degeneracy) * mean[:, None, None])))
    return LevelCriticalPoint(first, degeneracy, float(w[group].mean()), "non-analytic",
                              float(np.linalg.norm(mean)), None, None, linear, tuple(
            BandCriticalPoint(b, "non-analytic", None, None, None)
            for b in range(first, first + degeneracy)))


def label_and_classify(material: Material, cutoff_eV: float, points: dict[str, np.ndarray],
                       n_bands: int, *, model: KCentredModel | None = None,
                       origin_atom: int | None = None
                       ) -> tuple[tuple[PointSymmetry, ...], tuple[PointCriticalPoints, ...]]:
    """Irreducible-representation labels and van Hove types at the labelled points.

    For a local spinless model one full diagonalisation per point in the basis centred on it
    serves both (:func:`bandpert.symmetry.label_point` and :func:`classify_levels`). A model
    with spin–orbit or nonlocal terms is labelled as usual and each labelled level classified
    by :func:`classify_k_dependent`. The levels classified are the labelled ones.

    Parameters
    ----------
    material : Material
    cutoff_eV : float
    points : dict of str to numpy.ndarray
        Label → k in fractions of the reciprocal primitive vectors.
    n_bands : int
    model : KCentredModel, optional
        The band structure's model (same cutoff), whose V table is reused.
    origin_atom : int, optional

    Returns
    -------
    labels : tuple of PointSymmetry
        As :func:`bandpert.symmetry.label_points` returns them.
    critical : tuple of PointCriticalPoints
        One per point, in the same order; empty where the labels are empty. A spinor model of
        a crystal without inversion carries :data:`K_LINEAR_NOTE`.
    """
    if unlabelled_reason(material):
        return (), ()
    if getattr(material, "spin_orbit", None) is None:
        model = build_k_centred_model(material, cutoff_eV) if model is None else model
    frame = space_group_frame(material, origin_atom)
    reciprocal = reciprocal_vectors(material.vectors_A)
    if getattr(material, "spin_orbit", None) is not None or model.nonlocal_term is not None:
        inversion = bool(np.any(np.isclose(np.trace(frame.rotations_cart, axis1=1, axis2=2),
                                           -3.0)))
        note = K_LINEAR_NOTE if material.spin_orbit is not None and not inversion else ""
        labels, critical = [], []
        for lab, k in points.items():
            k = np.asarray(k, dtype=float)
            k_cart = k @ reciprocal
            states = _k_dependent_states(material, cutoff_eV, k_cart)
            ps = label_point(material, cutoff_eV, k, lab, n_bands, frame=frame, model=model,
                             origin_atom=origin_atom,
                             states=(states[0].basis.miller, states[2], states[3]))
            rot = _little_cogroup_cart(frame.rotations_cart, reciprocal, k_cart)
            levels = [(lv.first_band, lv.degeneracy) for lv in ps.levels]
            labels.append(ps)
            critical.append(PointCriticalPoints(lab, k, _classify_states(states, levels, rot),
                                                note, True))
        return tuple(labels), tuple(critical)
    labels, critical = [], []
    for lab, k in points.items():
        k = np.asarray(k, dtype=float)
        k_cart = k @ model.reciprocal_invA
        miller, w, v = k_centred_states(model, k_cart)
        ps = label_point(material, cutoff_eV, k, lab, n_bands, frame=frame, model=model,
                         origin_atom=origin_atom, states=(miller, w, v))
        kg = k_cart + miller @ model.reciprocal_invA
        rot = _little_cogroup_cart(frame.rotations_cart, model.reciprocal_invA, k_cart)
        levels = [(lv.first_band, lv.degeneracy) for lv in ps.levels]
        labels.append(ps)
        with single_blas_thread():  # small products: threads only contend
            classified = classify_levels(w, v, kg, levels, rot, model.kinetic_factor)
        critical.append(PointCriticalPoints(lab, k, classified, ""))
    return tuple(labels), tuple(critical)
