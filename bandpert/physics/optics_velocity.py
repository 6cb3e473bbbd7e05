"""Velocity matrix elements of the optical spectrum and the reference of its sum rule.

The optical matrix element is that of the velocity v = (1/ħ)∂H/∂k, not of p/m0 = ħ(k + G)/m0:
the two agree for a local potential only. A nonlocal potential (the square wells of
:mod:`bandpert.planewave.nonlocal_term`) or the spin–orbit term depends on k, and
(1/ħ)∂H/∂k = (i/ħ)[H, r] adds (i/ħ)[V_NL, r] to p/m0 (A. F. Starace, Phys. Rev. A 3, 1242
(1971); A. J. Read and R. J. Needs, Phys. Rev. B 44, 13071 (1991); both from memory). With
k-dependent terms both come from the model's own H(k) on its one fixed set of plane waves, by the
shared matrix differences of :func:`~bandpert.physics.hamiltonian_derivatives.
projected_gradient_laplacian` (whatever the terms are; none is named here); for a local model
the velocity is β(k + G) exactly (:meth:`~bandpert.planewave.k_polynomial.KPolynomial.momentum`).

The Thomas–Reiche–Kuhn f-sum generalises to the effective-mass sum rule: second-order
perturbation theory in k gives, for each state n of a finite basis,

    ∂²E_n/∂k_a² = ⟨n|∂²H/∂k_a²|n⟩ − Σ_{m≠n} 2|⟨m|∂H/∂k_a|n⟩|²/(E_m − E_n)

(the k·p mass formula: Yu & Cardona, Fundamentals of Semiconductors, Sec. 2.6, for a local
potential, from memory; the same second-order algebra for any H(k)). Summed over the occupied
states the pairs between two occupied levels cancel, and the zone average of a periodic
∂²E_n/∂k_a² over a whole band is 0, so the interband f-sum of every pair,

    n_eff = g Σ_k w_k Σ_{v,c} (f_v − f_c) 2(m0/ħ²)|⟨c|∂H/∂k_a|v⟩|²/E_cv   (averaged over a),

tends (with the intraband weight of a metal) to

    g Σ_k w_k Σ_n f_n (m0/ħ²)⟨n|∂²H/∂k_a²|n⟩,

the zone average of the occupied states' ⟨∂²H/∂k²⟩. For H0 = βħ²|k+G|²/2m0 and a local V,
∂²H/∂k_a² = βħ²/m0 exactly and this is βN (N valence electrons: the f-sum rule itself); the
spin–orbit and nonlocal terms add the occupied states' (m0/ħ²)⟨∂²V/∂k²⟩, computed here.
"""

from __future__ import annotations

import numpy as np

from ..planewave.k_polynomial import KPolynomial
from .hamiltonian_derivatives import projected_gradient_laplacian
from .optics import HBAR2_OVER_M0_EV_A2


def velocities(poly: KPolynomial, k_cart_invA: np.ndarray, vectors: np.ndarray,
               step_invA: float) -> tuple[np.ndarray, np.ndarray]:
    """Velocity matrix elements and curvatures ⟨n|∂²H/∂k²⟩ of eigenvectors of ``poly``.

    Parameters
    ----------
    poly : KPolynomial
        H(k) on a fixed orthonormal basis (plane waves or a reduced basis of them).
    k_cart_invA : numpy.ndarray
        (n_k, d) points.
    vectors : numpy.ndarray
        (n_k, n, n_b) eigenvectors (columns) of ``poly`` at each point.
    step_invA : float
        δ of the matrix differences (k-dependent models only).

    Returns
    -------
    momentum : numpy.ndarray
        (n_k, d, n_b, n_b) (m0/ħ²)⟨n|∂H/∂k_a|m⟩ (Å⁻¹; β⟨n|k + G|m⟩ for a local model).
    curvature : numpy.ndarray
        (n_k, n_b) (m0/ħ²)⟨n|Σ_a ∂²H/∂k_a²|n⟩/d (dimensionless; β for a local model).
    """
    k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
    if not poly.k_terms:
        return (poly.momentum(k, vectors),
                np.full((len(k), vectors.shape[2]), float(poly.kinetic_factor)))
    term = poly.k_terms[0]  # every term of a polynomial shares the fixed model and its basis
    model, basis = term.model, term.basis
    d, nb = k.shape[1], vectors.shape[2]
    momentum = np.empty((len(k), d, nb, nb), dtype=complex)
    curvature = np.empty((len(k), nb))
    for i, ki in enumerate(k):
        u = vectors[i] if basis is None else basis @ vectors[i]
        first, laplacian = projected_gradient_laplacian(model, ki, step_invA, u)
        momentum[i] = first / HBAR2_OVER_M0_EV_A2
        curvature[i] = laplacian / (HBAR2_OVER_M0_EV_A2 * d)
    return momentum, curvature
