"""Γ8 Luttinger parameters of a spin–orbit plane-wave model by the sum over states.

Löwdin's degenerate second-order perturbation theory in k (P.-O. Löwdin, J. Chem. Phys. 19, 1396
(1951); J. M. Luttinger & W. Kohn, Phys. Rev. 97, 869 (1955)) for the fourfold Γ8 level at the
valence top: with H(k) = H(0) + Σ_a k_a V_a + ½ Σ_ab k_a k_b W_ab + O(k³), the 4 × 4 effective
Hamiltonian of the level is E0 + Σ_ab k_a k_b D_ab (the linear term vanishes in a crystal with
inversion symmetry; in zincblende it is Kane's small k-linear term, left out here), with

    D_ab = ½ P W_ab P + ½ Σ_{m ∉ Γ8} [P V_a |m⟩⟨m| V_b P + P V_b |m⟩⟨m| V_a P] / (E0 − E_m),

P the projector on the level. The velocity is ∂H/∂k, not p/m: the spin–orbit and nonlocal
terms depend on k (their radial factors on |k + G|), so V_a and W_ab are the first and second
derivatives of the whole H(k), taken as central differences of the matrix on the fixed set of
plane waves centred on Γ (:mod:`bandpert.physics.hamiltonian_derivatives`: the kinetic part is
exact; the others are smooth in k, so the matrix differences are accurate to O(δ²) with
δ = 1e-4·2π/a). The sum runs over every state of the
basis, so the result is the exact curvature of the finite model at Γ.

Along a direction n the eigenvalues of D(n) = Σ_ab n_a n_b D_ab are the curvatures of the heavy
and light holes (each twice): m0/m = −λ/C, C = ħ²/2m0. With m0/m = γ1 ∓ 2γ2 along [001] and
γ1 ∓ 2γ3 along [111] (CONVENTIONS.md; heavy hole the smaller), γ1 = (hh + lh)/2, γ2 = (lh −
hh)/4 along [001], γ3 = (lh − hh)/4 along [111].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..errors import InputError
from ..input.material import Material
from ..planewave.model import centred_model
from ..planewave.solver import single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2 as C
from .hamiltonian_derivatives import MATRIX_STEP, hamiltonian_derivatives

#: Levels closer than this belong to Γ8 (eV).
DEGENERACY_EV = 1e-6


@dataclass(frozen=True)
class Gamma8SumOverStates:
    """Γ8 Luttinger parameters by the sum over states.

    Attributes
    ----------
    gammas : tuple of float
        γ1, γ2, γ3.
    gamma1_111 : float
        γ1 from [111] (equals γ1 from [001] in a cubic crystal: a check).
    curvatures_eV_A2 : dict
        Direction label → the four eigenvalues of D(n) (eV Å², ascending).
    """

    gammas: tuple[float, float, float]
    gamma1_111: float
    curvatures_eV_A2: dict[str, np.ndarray]


def gamma8_luttinger_sum_over_states(material: Material, cutoff_eV: float
                                     ) -> Gamma8SumOverStates:
    """Luttinger parameters of the Γ8 valence top of a spin–orbit model (module docstring).

    Raises
    ------
    InputError
        If the model has no spin–orbit term or its valence top at Γ is not fourfold.
    """
    if material.spin_orbit is None or material.valence_electrons is None:
        raise InputError("the Γ8 sum over states needs a spin-orbit model with "
                         "electrons.valence", material.file, "spin_orbit")
    model = centred_model(material, cutoff_eV, np.zeros(3), spin_orbit=True)
    top = material.valence_electrons - 1  # spinor bands hold one electron each
    with single_blas_thread():
        der = hamiltonian_derivatives(model, np.zeros(3), MATRIX_STEP * 2.0 * np.pi
                                      / material.a_A)
        w, c = scipy.linalg.eigh(der.hamiltonian_eV, check_finite=False)
        level = np.flatnonzero(np.abs(w - w[top]) < DEGENERACY_EV)
        if level.size != 4 or level.max() != top:
            raise InputError(f"the valence top at Γ is {level.size}-fold, expected the fourfold "
                             "Γ8 level of a cubic semiconductor", material.file, "spin_orbit")
        others = np.setdiff1d(np.arange(len(w)), level)
        v = der.first_projected(c[:, level], c)  # ⟨Γ8|V_a|m⟩ for every m
        w2 = der.second_projected(c[:, level], c[:, level])
    denom = w[top] - w[others]

    def block(a: int, b: int) -> np.ndarray:
        second = v[a][:, others] @ (v[b][:, others].conj().T / denom[:, None])
        return 0.5 * w2[a, b] + 0.5 * (second + second.conj().T)

    d = {(a, b): block(a, b) for a in range(3) for b in range(3)}

    def curvatures(n: np.ndarray) -> np.ndarray:
        n = n / np.linalg.norm(n)
        m = sum(n[a] * n[b] * d[a, b] for a in range(3) for b in range(3))
        return np.linalg.eigvalsh(0.5 * (m + m.conj().T))

    directions = {"100": np.array([1.0, 0, 0]), "110": np.array([1.0, 1, 0]),
                  "111": np.array([1.0, 1, 1])}
    lam = {k: curvatures(n) for k, n in directions.items()}
    # holes: m0/m = −λ/C; the heavy hole is the smaller m0/m (the flatter band)
    inv = {k: np.sort(-x / C) for k, x in lam.items()}
    hh100, lh100 = inv["100"][:2].mean(), inv["100"][2:].mean()
    hh111, lh111 = inv["111"][:2].mean(), inv["111"][2:].mean()
    return Gamma8SumOverStates(
        gammas=(float((hh100 + lh100) / 2), float((lh100 - hh100) / 4),
                float((lh111 - hh111) / 4)),
        gamma1_111=float((hh111 + lh111) / 2), curvatures_eV_A2=lam)
