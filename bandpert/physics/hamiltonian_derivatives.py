"""∂H/∂k and ∂²H/∂k∂k of a plane-wave model by matrix differences on one fixed set of plane waves.

With spin–orbit or nonlocal terms the velocity is ∂H/∂k, not p/m: those terms depend on k
through their radial factors on |k + G|, so the sum over states of a band's curvature needs the
derivatives of the whole H(k). With H(k) = H0(k) ⊗ 1 + V(k), V(k) as the model itself builds it
(:meth:`bandpert.planewave.model.PlaneWaveModel.perturbation_eV`: potential, nonlocal wells,
spin–orbit) on its one basis, shared by every point of the stencil (a basis following k would
add and drop plane waves between the points),

    V_a  = ∂H0/∂k_a + [V(k + δe_a) − V(k − δe_a)] / 2δ,
    W_aa = ∂²H0/∂k_a² + [V(k + δe_a) − 2V(k) + V(k − δe_a)] / δ²,
    W_ab = [V(k + δe_a + δe_b) − V(k + δe_a − δe_b) − V(k − δe_a + δe_b) + V(k − δe_a − δe_b)]
           / 4δ²   (a ≠ b)

(central differences, all O(δ²); common practice, no source; 19 builds of V(k) in 3D: the
seven-point form of W_ab with 13 builds is 20 % faster but its error, with fourth derivatives,
put 5e-8 of the diagonal into the off-diagonal Hessian of silicon-fitted's Γ6, against 1e-11).
The kinetic derivatives are exact, ∂H0/∂k_a = 2βC(k+G)_a and ∂²H0/∂k_a∂k_b = 2βC δ_ab (C =
ħ²/2m0, β the kinetic factor): differenced, the kinetic diagonal (up to the cutoff, ~200 eV)
would leave a rounding of ε·200 eV/δ² in W. The step δ = :data:`MATRIX_STEP`·2π/a balances
the O(δ²) truncation of the spin–orbit and nonlocal parts against rounding (measured on the
Hessians of germanium-fitted: truncation 4e-6 relative at 1e-2·2π/a, 4e-8 at 1e-3; at 1e-4
the nonlocal wells' closed form, evaluated where |k+G| ≈ |k+G′|, left a rounding of 6e-6
before its radial overlap was made more accurate, 1e-8 since). Whatever k
dependence the model's V(k) has (a new term included) is differentiated without being named
here; where it is not smooth at k (a kink b|k|), the second difference along e_a + e_b
disagrees with the axes' (:attr:`HamiltonianDerivatives.kink_eV_A2`), and W means nothing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..planewave.model import PlaneWaveModel

__all__ = ["MATRIX_STEP", "HamiltonianDerivatives", "hamiltonian_derivatives",
           "projected_gradient_laplacian"]

#: Step δ of the matrix differences, in units of 2π/a.
MATRIX_STEP: float = 1e-3


@dataclass(frozen=True)
class HamiltonianDerivatives:
    """H(k) and its first and second k-derivatives on one fixed basis.

    Attributes
    ----------
    hamiltonian_eV : numpy.ndarray
        (N, N) H(k).
    first_eV_A : numpy.ndarray
        (d, N, N) V_a = ∂H/∂k_a.
    second_eV_A2 : numpy.ndarray
        (d, d, N, N) W_ab = ∂²H/∂k_a∂k_b (W_ab = W_ba).
    step_invA : float
        δ.
    kink_eV_A2 : numpy.ndarray
        (d(d−1)/2, N, N), for each pair a < b: K_ab = [V(k + δe_a + δe_b) + V(k − δe_a − δe_b)
        − 2V(k)]/2δ² − ½(V_aa + V_bb) − V_ab, the second difference along e_a + e_b against
        what the second differences along the axes and the mixed one predict there (V's parts
        of W): O(δ²) where V is smooth at k, (√2 − 2)·b/δ at a kink b|k| (e.g. |k + G| at
        k + G = 0), from the builds W needs anyway.
    """

    hamiltonian_eV: np.ndarray
    first_eV_A: np.ndarray
    second_eV_A2: np.ndarray
    step_invA: float
    kink_eV_A2: np.ndarray

    def first_projected(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """(d, r, c) U† V_a U′ for the columns U (rows) and U′ (cols), e.g. eigenvectors."""
        left = rows.conj().T
        return np.stack([left @ v @ cols for v in self.first_eV_A])

    def kink_projected(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """(d(d−1)/2, r, c) U† K_ab U′ (:attr:`kink_eV_A2`)."""
        left = rows.conj().T
        return np.stack([left @ x @ cols for x in self.kink_eV_A2])

    def second_projected(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """(d, d, r, c) U† W_ab U′ for the columns U (rows) and U′ (cols)."""
        left = rows.conj().T
        d = self.first_eV_A.shape[0]
        out = np.empty((d, d, rows.shape[1], cols.shape[1]), dtype=complex)
        for a in range(d):
            for b in range(a, d):
                out[a, b] = out[b, a] = left @ self.second_eV_A2[a, b] @ cols
        return out


def hamiltonian_derivatives(model: PlaneWaveModel, k_cart_invA: np.ndarray, step_invA: float
                            ) -> HamiltonianDerivatives:
    """H(k), V_a and W_ab of ``model`` at k by the central differences of the module docstring.

    Parameters
    ----------
    model : PlaneWaveModel
        A fixed-basis model (e.g. :func:`bandpert.planewave.model.centred_model` around k):
        every point of the stencil is built on its one basis.
    k_cart_invA : numpy.ndarray
        (d,) Cartesian k (Å⁻¹).
    step_invA : float
        δ (Å⁻¹).

    Returns
    -------
    HamiltonianDerivatives
    """
    k = np.asarray(k_cart_invA, dtype=float).reshape(-1)
    d = k.size
    eye = np.eye(d) * step_invA
    v = model.perturbation_eV
    v0 = v(k)
    plus = [v(k + eye[a]) for a in range(d)]
    minus = [v(k - eye[a]) for a in range(d)]
    # the kinetic diagonal βC|k+G|² (once per spin component) exactly: 2βC(k+G)_a, 2βC δ_ab
    kg = np.tile(k + model.basis.g_cart_invA, (model.n_components, 1))
    beta_c = model.kinetic_constant_eV_A2
    idx = np.arange(kg.shape[0])
    h0 = np.array(v0, dtype=np.result_type(v0, float), copy=True)
    h0[idx, idx] += model.unperturbed_eV(k)[0]
    first = np.stack([(plus[a] - minus[a]) / (2 * step_invA) for a in range(d)]).astype(
        np.result_type(v0, float))
    first[:, idx, idx] += 2.0 * beta_c * kg.T
    second = np.empty((d, d) + h0.shape, dtype=np.result_type(h0, complex))
    curve = [(plus[a] - 2 * v0 + minus[a]) / step_invA**2 for a in range(d)]
    kink = []
    for a in range(d):
        second[a, a] = curve[a]
        second[a, a][idx, idx] += 2.0 * beta_c
        for b in range(a + 1, d):
            pp = v(k + eye[a] + eye[b])
            pm = v(k + eye[a] - eye[b])
            mp = v(k - eye[a] + eye[b])
            mm = v(k - eye[a] - eye[b])
            mixed = (pp - pm - mp + mm) / (4 * step_invA**2)
            second[a, b] = second[b, a] = mixed
            # the second difference along e_a + e_b against what V_aa, V_bb, V_ab predict there
            kink.append((pp + mm - 2 * v0) / (2 * step_invA**2) - 0.5 * (curve[a] + curve[b])
                        - mixed)
    return HamiltonianDerivatives(h0, first, second, float(step_invA),
                                  np.stack(kink) if kink else np.zeros((0,) + h0.shape))



def projected_gradient_laplacian(model: PlaneWaveModel, k_cart_invA: np.ndarray,
                                 step_invA: float, vectors: np.ndarray
                                 ) -> tuple[np.ndarray, np.ndarray]:
    """U†V_aU and the diagonal of U†(Σ_a W_aa)U for the columns U, from 2d + 1 builds of V(k).

    The same central differences as :func:`hamiltonian_derivatives` (module docstring), with
    the kinetic parts exact (2βC(k+G)_a and 2βC·d on the diagonal), projected onto U as each
    axis is built: no (d, d, N, N) array and no mixed differences (the Laplacian Σ_a W_aa
    needs the axes only). For velocities and the effective-mass sum rule on many k-points.

    Parameters
    ----------
    model : PlaneWaveModel
        A fixed-basis model; every point of the stencil is built on its one basis.
    k_cart_invA : numpy.ndarray
        (d,) Cartesian k (Å⁻¹).
    step_invA : float
        δ (Å⁻¹).
    vectors : numpy.ndarray
        (N, r) columns U in the model's basis (N = ``model.matrix_size``), e.g. eigenvectors.

    Returns
    -------
    first : numpy.ndarray
        (d, r, r) U†(∂H/∂k_a)U (eV Å).
    laplacian : numpy.ndarray
        (r,) real diagonal of U†(Σ_a ∂²H/∂k_a²)U (eV Å²).
    """
    k = np.asarray(k_cart_invA, dtype=float).reshape(-1)
    d = k.size
    u = np.asarray(vectors)
    uh = u.conj().T
    eye = np.eye(d) * step_invA
    v = model.perturbation_eV
    v0 = v(k)
    kg = np.tile(k + model.basis.g_cart_invA, (model.n_components, 1))
    idx = np.arange(kg.shape[0])
    two_beta_c = 2.0 * model.kinetic_constant_eV_A2
    first = np.empty((d, u.shape[1], u.shape[1]), dtype=np.result_type(v0, u, complex))
    curve = np.zeros(v0.shape, dtype=np.result_type(v0, float))
    for a in range(d):
        plus, minus = v(k + eye[a]), v(k - eye[a])
        slope = (plus - minus) / (2 * step_invA)
        slope[idx, idx] += two_beta_c * kg[:, a]
        first[a] = uh @ (slope @ u)
        curve += (plus - v0) + (minus - v0)
    curve /= step_invA**2
    curve[idx, idx] += two_beta_c * d
    return first, np.einsum("an,an->n", u.conj(), curve @ u).real
