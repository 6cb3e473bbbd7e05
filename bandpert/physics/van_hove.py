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
:data:`K_LINEAR_NOTE`.
"""

from __future__ import annotations

from dataclasses import dataclass

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
from ..units import HBAR2_OVER_2M0_EV_A2 as C
from .critical_points import (
    LINEAR_SPLITTING_EV_A,
    STATIONARY_GRADIENT_EV_A,
    curvature_kind,
    fibonacci_directions,
)
from .hamiltonian_derivatives import MATRIX_STEP, HamiltonianDerivatives, hamiltonian_derivatives

__all__ = [
    "DIRECTIONS",
    "BandCriticalPoint",
    "LevelCriticalPoint",
    "K_LINEAR_NOTE",
    "KRAMERS_TOLERANCE",
    "PointCriticalPoints",
    "classify_from_derivatives",
    "classify_k_dependent",
    "classify_levels",
    "label_and_classify",
    "sum_over_states_hessian",
]

#: Directions sampled on the unit sphere for a degenerate block (as ``masses`` does).
DIRECTIONS: int = 200

#: A twofold spinor level whose block curvatures differ by less than this (relative) along
#: every direction is a Kramers pair with one Hessian (rounding leaves ~1e-10).
KRAMERS_TOLERANCE: float = 1e-6


@dataclass(frozen=True)
class BandCriticalPoint:
    """One band of a level at a labelled point.

    Attributes
    ----------
    band : int
        0-based band index.
    kind : str
        ``"minimum"``, ``"maximum"``, ``"saddle"``, ``"crossing"`` or ``"not stationary"``
        (the words of :data:`bandpert.physics.critical_points.KINDS`).
    van_hove : str or None
        ``"M0"`` … ``"M3"`` (the index as a type); None at a crossing, a non-stationary point
        or a warped saddle.
    saddle_index : int or None
        Principal directions along which the band curves down; None at a crossing or a
        warped saddle (mixed signs that the fitted quadratic form does not show).
    principal_m0_over_mstar : numpy.ndarray or None
        (d,) signed principal m0/m* ascending of a non-degenerate band's Hessian; None for the
        bands of a degenerate level (they have no principal axes) and at a crossing.
    curvature_range_m0_over_mstar : numpy.ndarray or None
        (2,) smallest and largest signed m0/m* over the directions (the Hessian's extreme
        eigenvalues, or the sampled block curvatures of a degenerate band); None at a crossing.
    """

    band: int
    kind: str
    van_hove: str | None
    saddle_index: int | None
    principal_m0_over_mstar: np.ndarray | None
    curvature_range_m0_over_mstar: np.ndarray | None = None


@dataclass(frozen=True)
class LevelCriticalPoint:
    """The critical-point classification of one (degenerate) level.

    Attributes
    ----------
    first_band, degeneracy : int
    energy_eV : float
        Mean eigenvalue (absolute).
    method : str
        ``"hessian"`` (non-degenerate: sum-over-states Hessian), ``"degenerate block"``
        (the second-order block of the multiplet over :data:`DIRECTIONS` directions) or
        ``"crossing"`` (linear splitting, nothing classified).
    gradient_eV_A : float
        |∇E| of the level (mean over the set), eV·Å.
    hessian_eV_A2 : numpy.ndarray or None
        (d, d) ∂²E/∂k_i∂k_j of a non-degenerate level.
    symmetry_residual : float or None
        max|H − (1/|G_k|) Σ_R R H Rᵀ| / max|H| over the little co-group (non-degenerate only).
    linear_splitting_eV_A : float
        Largest |q·p| inside the set per unit q beyond its mean (0 for a single band).
    bands : tuple of BandCriticalPoint
    """

    first_band: int
    degeneracy: int
    energy_eV: float
    method: str
    gradient_eV_A: float
    hessian_eV_A2: np.ndarray | None
    symmetry_residual: float | None
    linear_splitting_eV_A: float
    bands: tuple[BandCriticalPoint, ...]

    @property
    def summary(self) -> str:
        """A short phrase for tables: ``"M0"``, ``"M2 (block)"``, ``"crossing"``, ``"M1/M2"``."""
        if self.method == "crossing":
            return "crossing"
        kinds = [b.van_hove or ("warped saddle" if b.kind == "saddle" else b.kind)
                 for b in self.bands]
        text = "/".join(dict.fromkeys(kinds))
        return f"{text} (block)" if self.method == "degenerate block" else text


@dataclass(frozen=True)
class PointCriticalPoints:
    """The classified levels at one labelled point.

    Attributes
    ----------
    point : str
    k_frac : numpy.ndarray
    levels : tuple of LevelCriticalPoint
        Ascending, the same levels as the irreducible-representation labels.
    note : str
        ``""``, why nothing was classified, or :data:`K_LINEAR_NOTE`.
    matrix_differences : bool
        ∂H/∂k and ∂²H/∂k∂k came from matrix differences (spin–orbit or nonlocal terms,
        :func:`classify_k_dependent`), not from 2βC(k+G).
    """

    point: str
    k_frac: np.ndarray
    levels: tuple[LevelCriticalPoint, ...]
    note: str
    matrix_differences: bool = False


def _momentum_rows(vectors: np.ndarray, kg: np.ndarray, bands: np.ndarray, beta: float
                   ) -> np.ndarray:
    """p_i^{nm} = 2βC Σ_G c_n*(G) (k+G)_i c_m(G) for n in ``bands`` and every m: (d, nb, n)."""
    rows = vectors[:, bands].conj().T  # (nb, n_G)
    return 2.0 * beta * C * np.stack([(rows * kg[:, i]) @ vectors for i in range(kg.shape[1])])


def sum_over_states_hessian(energies_eV: np.ndarray, p_row: np.ndarray, band: int,
                            exclude: np.ndarray, kinetic_factor: float = 1.0,
                            second_eV_A2: np.ndarray | None = None) -> np.ndarray:
    """∂²E_n/∂k_i∂k_j = W_ij^{nn} + Σ_m 2 Re[p_i^{nm} p_j^{mn}]/(E_n − E_m) (eV Å²).

    W = ∂²H/∂k_i∂k_j is 2βC δ_ij for a local model (the kinetic term alone).

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n,) every eigenvalue of the basis.
    p_row : numpy.ndarray
        (d, n) p_i^{nm} = ⟨n|∂H/∂k_i|m⟩ for the band n and every m (eV Å).
    band : int
        n.
    exclude : numpy.ndarray
        Indices left out of the sum (n itself, and its level).
    kinetic_factor : float
        β of the kinetic term β C|k+G|² (used when ``second_eV_A2`` is None).
    second_eV_A2 : numpy.ndarray, optional
        (d, d) ⟨n|∂²H/∂k_i∂k_j|n⟩ of a model whose H depends on k beyond the kinetic term.
    """
    keep = np.ones(energies_eV.size, dtype=bool)
    keep[exclude] = False
    p = p_row[:, keep]
    t = np.einsum("im,jm,m->ij", p, p.conj(), 1.0 / (energies_eV[band] - energies_eV[keep]))
    first = (2.0 * kinetic_factor * C * np.eye(p_row.shape[0]) if second_eV_A2 is None
             else np.real(second_eV_A2))
    return first + 2.0 * t.real


def _by_index(index: int, d: int) -> str:
    return "minimum" if index == 0 else "maximum" if index == d else "saddle"


def _symmetry_residual(h: np.ndarray, rotations_cart: np.ndarray | None) -> float | None:
    if rotations_cart is None or len(rotations_cart) == 0:
        return None
    sym = np.einsum("rij,jk,rlk->il", rotations_cart, h, rotations_cart) / len(rotations_cart)
    return float(np.max(np.abs(h - sym)) / max(np.max(np.abs(h)), 1e-300))


_AXES = np.array([[1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 0], [1, -1, 0], [1, 0, 1],
                  [1, 0, -1], [0, 1, 1], [0, 1, -1], [1, 1, 1], [1, 1, -1], [1, -1, 1],
                  [-1, 1, 1]], dtype=float)
_AXES /= np.linalg.norm(_AXES, axis=1)[:, None]


def _block_curvatures(block: np.ndarray, u: np.ndarray) -> np.ndarray:
    """(N, g) ascending m0/m* of the set along each unit u (rows), from M_ij^{ab}."""
    h = np.einsum("ni,nj,ijab->nab", u, u, block)
    return np.linalg.eigvalsh(h) / C


def _hessian_level(first: int, degeneracy: int, energy: float, h: np.ndarray,
                   gradient: float, linear: float, rotations_cart: np.ndarray | None
                   ) -> LevelCriticalPoint:
    """A level whose bands share one Hessian h (a single band, or a Kramers pair)."""
    h = 0.5 * (h + h.T)
    d = h.shape[0]
    w = np.linalg.eigvalsh(h / (2.0 * C))
    index = int(np.sum(w < 0))
    kind = "not stationary" if gradient > STATIONARY_GRADIENT_EV_A else _by_index(index, d)
    bands = tuple(BandCriticalPoint(b, kind, None if kind == "not stationary" else f"M{index}",
                                    index, w, np.array([w[0], w[-1]]))
                  for b in range(first, first + degeneracy))
    return LevelCriticalPoint(first, degeneracy, energy, "hessian", gradient, h,
                              _symmetry_residual(h, rotations_cart), linear, bands)


def _degenerate_level(e: np.ndarray, p: np.ndarray, second: np.ndarray, group: np.ndarray,
                      rotations_cart: np.ndarray | None, kramers: bool) -> LevelCriticalPoint:
    """A multiplet (module docstring): crossing, Kramers pair or second-order block.

    ``p`` (d, g, n): ⟨a|∂H/∂k_i|m⟩ for the set and every m; ``second`` (d, d, g, g):
    ⟨a|∂²H/∂k_i∂k_j|b⟩ inside the set.
    """
    d = p.shape[0]
    energy = float(e[group].mean())
    inner = p[:, :, group]  # (d, g, g)
    mean = np.mean(np.real(np.einsum("inn->in", inner)), axis=1)
    gradient = float(np.linalg.norm(mean))
    linear = float(np.max(np.abs(inner - np.eye(group.size) * mean[:, None, None])))
    if linear > LINEAR_SPLITTING_EV_A:
        return LevelCriticalPoint(int(group[0]), group.size, energy, "crossing", gradient, None,
                                  None, linear, tuple(
            BandCriticalPoint(int(b), "crossing", None, None, None) for b in group))
    keep = np.ones(e.size, dtype=bool)
    keep[group] = False
    q = p[:, :, keep]  # (d, g, M)
    t = np.einsum("iam,jbm,m->ijab", q, q.conj(), 1.0 / (energy - e[keep]))
    block = 0.5 * (t + t.transpose(1, 0, 2, 3)) + 0.5 * second
    u = fibonacci_directions(DIRECTIONS, d)
    values = _block_curvatures(block, u)  # (N, g)
    if kramers and group.size == 2 and np.max(np.ptp(values, axis=1)) <= KRAMERS_TOLERANCE * max(
            1.0, float(np.max(np.abs(values)))):
        # one band carried twice: E(q) = Σ q_i q_j M_ij^{aa}, so ∂²E/∂q_i∂q_j = tr_ab M_ij
        h = np.real(np.einsum("ijaa->ij", block))
        return _hessian_level(int(group[0]), 2, energy, h, gradient, linear, rotations_cart)
    # the range also over the axes ⟨100⟩, ⟨110⟩, ⟨111⟩ of the Cartesian frame, where cubic
    # crystals have their extreme curvatures (the sample may pass beside them)
    axes = _AXES if d == 3 else np.eye(d)
    both = np.concatenate([values, _block_curvatures(block, axes)])
    out = []
    for a, b in enumerate(group):
        kind, index = curvature_kind(u, values[:, a])
        if gradient > STATIONARY_GRADIENT_EV_A:
            kind = "not stationary"
        vh = None if kind == "not stationary" or index is None else f"M{index}"
        out.append(BandCriticalPoint(int(b), kind, vh, index, None,
                                     np.array([both[:, a].min(), both[:, a].max()])))
    return LevelCriticalPoint(int(group[0]), group.size, energy, "degenerate block", gradient,
                              None, None, linear, tuple(out))


def classify_levels(energies_eV: np.ndarray, vectors: np.ndarray, kg_cart_invA: np.ndarray,
                    levels: list[tuple[int, int]],
                    rotations_cart: np.ndarray | None = None, kinetic_factor: float = 1.0
                    ) -> tuple[LevelCriticalPoint, ...]:
    """Classify each level of one k-point of a local spinless model from its eigenstates.

    ∂H/∂k_i = 2βC (k + G)_i δ_GG′ and ∂²H/∂k_i∂k_j = 2βC δ_ij exactly
    (:func:`classify_from_derivatives`).

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n,) every eigenvalue of H(k) in the fixed basis, ascending.
    vectors : numpy.ndarray
        (n_G, n) every eigenvector (columns).
    kg_cart_invA : numpy.ndarray
        (n_G, d) k + G of each plane wave (Å⁻¹).
    levels : list of (int, int)
        (first band, degeneracy) of each level to classify.
    rotations_cart : numpy.ndarray, optional
        (r, d, d) Cartesian rotations of the little co-group, for the symmetry residual.
    kinetic_factor : float
        β of the model's kinetic term β ħ²|k+G|²/2m0.

    Returns
    -------
    tuple of LevelCriticalPoint
    """
    if not levels:
        return ()
    top = max(a + g for a, g in levels)
    p = _momentum_rows(np.asarray(vectors), np.asarray(kg_cart_invA, dtype=float),
                       np.arange(top), kinetic_factor)
    d = p.shape[0]
    second = 2.0 * kinetic_factor * C * np.einsum("ij,ab->ijab", np.eye(d), np.eye(top))
    return classify_from_derivatives(energies_eV, p, second, levels, rotations_cart)


def classify_from_derivatives(energies_eV: np.ndarray, p: np.ndarray, second: np.ndarray,
                              levels: list[tuple[int, int]],
                              rotations_cart: np.ndarray | None = None, kramers: bool = False
                              ) -> tuple[LevelCriticalPoint, ...]:
    """Classify each level of one k-point from ∂H/∂k and ∂²H/∂k∂k in its eigenbasis.

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n,) every eigenvalue of H(k) in the fixed basis, ascending.
    p : numpy.ndarray
        (d, top, n) ⟨a|∂H/∂k_i|m⟩ for the bands a below the top of the last level and every m.
    second : numpy.ndarray
        (d, d, top, top) ⟨a|∂²H/∂k_i∂k_j|b⟩ between those bands.
    levels : list of (int, int)
        (first band, degeneracy) of each level.
    rotations_cart : numpy.ndarray, optional
        (r, d, d) Cartesian rotations of the little co-group, for the symmetry residual.
    kramers : bool
        A spinor model: a twofold level whose second-order block is a multiple of the identity
        along every direction (to :data:`KRAMERS_TOLERANCE`) is a Kramers pair, one band
        carried twice, classified by its one Hessian.

    Returns
    -------
    tuple of LevelCriticalPoint
    """
    e = np.asarray(energies_eV, dtype=float)
    out = []
    for a, g in levels:
        group = np.arange(a, a + g)
        if g == 1:
            h = sum_over_states_hessian(e, p[:, a, :], a, group,
                                        second_eV_A2=second[:, :, a, a])
            out.append(_hessian_level(a, 1, float(e[a]), h,
                                      float(np.linalg.norm(np.real(p[:, a, a]))), 0.0,
                                      rotations_cart))
        else:
            out.append(_degenerate_level(e, p[:, group, :], second[:, :, a:a + g, a:a + g],
                                         group, rotations_cart, kramers))
    return tuple(out)


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
        return classify_from_derivatives(w, p, second, levels, rotations_cart,
                                         kramers=model.n_components == 2)


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
