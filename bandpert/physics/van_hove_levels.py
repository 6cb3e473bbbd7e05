"""The classifier of the levels at one k-point: Hessian, Kramers pair, degenerate block, crossing.

Given ⟨a|∂H/∂k_i|m⟩ and ⟨a|∂²H/∂k_i∂k_j|b⟩ in the eigenbasis of H(k) (from 2βC(k+G) for a local
spinless model, or from matrix differences), each level gets its van Hove type by the rules of
:mod:`bandpert.physics.van_hove` (which documents them and finds the states at the labelled
points): the sum-over-states Hessian of a non-degenerate level or a Kramers pair, the
second-order (Löwdin) block of a multiplet, a crossing where the set splits linearly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..units import HBAR2_OVER_2M0_EV_A2 as C
from .critical_points import (
    LINEAR_SPLITTING_EV_A,
    STATIONARY_GRADIENT_EV_A,
    curvature_kind,
    fibonacci_directions,
)

__all__ = [
    "DIRECTIONS",
    "KRAMERS_TOLERANCE",
    "BandCriticalPoint",
    "LevelCriticalPoint",
    "PointCriticalPoints",
    "classify_from_derivatives",
    "classify_levels",
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
        (the words of :data:`bandpert.physics.critical_points.KINDS`), or ``"non-analytic"``
        where H(k) itself has a kink at the point
        (:data:`bandpert.physics.van_hove.KINK_TOLERANCE`).
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
        ``"hessian"`` (non-degenerate or a Kramers pair: sum-over-states Hessian),
        ``"degenerate block"`` (the second-order block of the multiplet over
        :data:`DIRECTIONS` directions), ``"crossing"`` (linear splitting, nothing classified)
        or ``"non-analytic"`` (H(k) has a kink at k, nothing classified).
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
        ``""``, why nothing was classified, or
        :data:`bandpert.physics.van_hove.K_LINEAR_NOTE`.
    matrix_differences : bool
        ∂H/∂k and ∂²H/∂k∂k came from matrix differences (spin–orbit or nonlocal terms,
        :func:`bandpert.physics.van_hove.classify_k_dependent`), not from 2βC(k+G).
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
