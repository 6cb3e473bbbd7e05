"""H(k) of a local plane-wave model on one fixed basis, as a polynomial in k.

On a fixed set of plane waves {G} the local model is exactly quadratic in k:

    H(k) = H0 + β(ħ²/m0) Σ_i k_i Q_i + β(ħ²/2m0) |k|² 1,
    H0 = V + diag(β ħ²|G|²/2m0),  Q_i = diag(G_i),

and p = ħ(k + G) is diagonal in plane waves, so the velocity is (1/ħ) ∂H/∂k = β(ħ/m0)(k + Q)
(β the model's kinetic factor, 1 for the free-electron mass).
The same three pieces survive any change to another orthonormal basis B (columns in plane-wave
coefficients): H0 → B†H0B, Q_i → B†Q_iB, the |k|² term unchanged. This is what makes the
reduced-basis interpolation of :mod:`bandpert.physics.reduced_basis` cheap: the small matrices are
built once and H(k) at any k is a sum of four of them (E. L. Shirley, Phys. Rev. B 54, 16464
(1996); M. Cardona and F. H. Pollak, Phys. Rev. 142, 530 (1966) for k·p over the whole zone).

Terms that are not polynomial in k do not fit this form. The spin–orbit term of
:mod:`bandpert.planewave.spinorbit` has radial factors B_s(|k + G|) and is projected onto the
basis at each k instead (:class:`ProjectedSpinOrbit`): B†H_so(k)B costs one product of the
(3n × n) coupling with the (n × 2n_r) basis per k, O(n² n_r), against O(n³) for the exact
spinor diagonalisation. On spinor plane waves (spin index slowest) H0 → 1₂ ⊗ H0 and Q → Q ⊗ 1₂.
The nonlocal wells of :mod:`bandpert.planewave.nonlocal_term` depend on |k + G| and on the
angles between the k + G, and are projected at each k the same way (:class:`ProjectedNonlocal`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..units import HBAR2_OVER_2M0_EV_A2
from .model import PlaneWaveModel

#: Step (Å⁻¹) of the central differences of the projected spin–orbit and nonlocal terms (their
#: velocity part).
VELOCITY_STEP_INVA = 1e-4

#: Bytes of Hamiltonians held at once when a block of k-points is diagonalised together.
BLOCK_BYTES = 16 * 2**20


def _cross(c: np.ndarray, p: list, a: int, b: int) -> np.ndarray:
    """W V for W = w ∘ (K_a K_bᵀ − K_b K_aᵀ), given p[j] = w (K_j ∘ V): K_a ∘ p[b] − K_b ∘ p[a]."""
    return c[a][:, None] * p[b] - c[b][:, None] * p[a]


@dataclass(frozen=True)
class ProjectedSpinOrbit:
    """B†H_so(k)B of a fixed spinor plane-wave model on the orthonormal columns B, at any k.

    Attributes
    ----------
    model : PlaneWaveModel
        The fixed set of plane waves with its spin–orbit term.
    basis : numpy.ndarray or None
        (2n, n_r) spinor columns (spin up rows first); None for the plane waves themselves.
    """

    model: PlaneWaveModel = field(repr=False)
    basis: np.ndarray | None = field(default=None, repr=False)

    def matrices(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """(n_k, n_r, n_r) projected H_so(k) = −i B†(W(k)·σ)B (eV).

        W_c = w ∘ (K_a K_bᵀ − K_b K_aᵀ) ((a, b, c) cyclic, K = (k + G)/(2π/a), w the weight
        Σ_s λ_s S_s(G_i − G_j) B_s(|K_i|) B_s(|K_j|) of
        :meth:`~bandpert.planewave.spinorbit.SpinOrbitTerm.coupling`), so
        W_c V = K_a ∘ (w (K_b ∘ V)) − K_b ∘ (w (K_a ∘ V)): one product of w with the six
        scaled copies of the basis' spin blocks per k, real when w is (a centrosymmetric crystal
        about its origin), and W itself is never formed.
        """
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        model, term = self.model, self.model.spin_orbit
        n = model.size
        b = np.eye(2 * n, dtype=complex) if self.basis is None else self.basis
        up, down = b[:n], b[n:]
        r = b.shape[1]
        real = not np.any(model.structure.imag)
        structure = model.structure.real if real else model.structure
        out = np.empty((len(k), r, r), dtype=complex)
        for i, ki in enumerate(k):
            kg = ki + model.basis.g_cart_invA
            radial = term.radial(np.linalg.norm(kg, axis=1))  # (n_s, n)
            w = np.zeros((n, n), dtype=structure.dtype)
            for s, lam in enumerate(term.strengths_eV):
                w += lam * structure[s] * np.outer(radial[s], radial[s])
            c = (kg / term.unit_invA).T  # (3, n): K_x, K_y, K_z
            y = np.concatenate([c[a][:, None] * blk for blk in (up, down) for a in range(3)],
                               axis=1)  # (n, 6r): K_a ∘ B_up (a = x, y, z), then K_a ∘ B_down
            if real:
                wy = w @ np.concatenate([y.real, y.imag], axis=1)
                wy = wy[:, :6 * r] + 1j * wy[:, 6 * r:]
            else:
                wy = w @ y
            pu = [wy[:, a * r:(a + 1) * r] for a in range(3)]  # w (K_a ∘ B_up)
            pd = [wy[:, (3 + a) * r:(4 + a) * r] for a in range(3)]
            wx_u, wy_u, wz_u = (_cross(c, pu, a, bb) for a, bb in ((1, 2), (2, 0), (0, 1)))
            wx_d, wy_d, wz_d = (_cross(c, pd, a, bb) for a, bb in ((1, 2), (2, 0), (0, 1)))
            # H_so = [[−iWz, −iWx − Wy], [−iWx + Wy, iWz]] (spinor_hamiltonian)
            top = -1j * wz_u - 1j * wx_d - wy_d
            bottom = -1j * wx_u + wy_u + 1j * wz_d
            out[i] = up.conj().T @ top + down.conj().T @ bottom
        return 0.5 * (out + np.swapaxes(out, 1, 2).conj())

    def project(self, basis: np.ndarray) -> ProjectedSpinOrbit:
        """The same term on the columns ``basis`` of this one's basis."""
        b = np.asarray(basis)
        return ProjectedSpinOrbit(self.model, b if self.basis is None else self.basis @ b)


@dataclass(frozen=True)
class ProjectedNonlocal:
    """B†(1_c ⊗ V_NL(k))B of a fixed plane-wave model's nonlocal wells on the columns B.

    V_NL(k) depends on k through |k + G| and the angles between the k + G
    (:mod:`~bandpert.planewave.nonlocal_term`), so it is built on the fixed plane waves at each
    k and projected, O(n_f² n_r) per k, like the spin–orbit term. It is spin-independent: on
    spinor columns (c = 2 components, spin index slowest) the projection is the sum over the
    two spin blocks. With an energy-dependent well the term is
    :meth:`~bandpert.planewave.model.PlaneWaveModel.wells_eV`, S^{−1/2} H_c S^{−1/2} less the
    model without wells, projected whole.

    Attributes
    ----------
    model : PlaneWaveModel
        The fixed set of plane waves with its nonlocal term (and structure factors).
    basis : numpy.ndarray or None
        (c·n, n_r) columns; None for the plane waves themselves.
    """

    model: PlaneWaveModel = field(repr=False)
    basis: np.ndarray | None = field(default=None, repr=False)

    def matrices(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """(n_k, n_r, n_r) projected V_NL(k) (eV)."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        model = self.model
        n, c = model.size, model.n_components
        r = c * n if self.basis is None else self.basis.shape[1]
        out = np.empty((len(k), r, r), dtype=complex)
        energy_dependent = model.nonlocal_term.energy_dependent
        for i, ki in enumerate(k):
            if energy_dependent:  # not spin-diagonal: the whole (c·n) matrix
                v = model.wells_eV(ki)
                out[i] = v if self.basis is None else self.basis.conj().T @ (v @ self.basis)
                continue
            v = model.nonlocal_term.matrix(ki + model.basis.g_cart_invA, model.structure)
            if self.basis is None:
                out[i] = np.kron(np.eye(c), v)
                continue
            blocks = [self.basis[s * n:(s + 1) * n] for s in range(c)]
            out[i] = sum(b.conj().T @ (v @ b) for b in blocks)
        return 0.5 * (out + np.swapaxes(out, 1, 2).conj())

    def project(self, basis: np.ndarray) -> ProjectedNonlocal:
        """The same term on the columns ``basis`` of this one's basis."""
        b = np.asarray(basis)
        return ProjectedNonlocal(self.model, b if self.basis is None else self.basis @ b)


@dataclass(frozen=True)
class KPolynomial:
    """H(k) = H0 + β(ħ²/m0) k·Q + β(ħ²/2m0)|k|² on one fixed orthonormal basis.

    Attributes
    ----------
    h0_eV : numpy.ndarray
        (n, n) Hermitian H(k = 0) in eV.
    q_invA : numpy.ndarray
        (d, n, n) Hermitian matrices of the operator G (Å⁻¹), or (d, n) their diagonals when
        the basis is plane waves; the momentum is p = ħ(k + Q).
    spin_orbit : ProjectedSpinOrbit or None
        The spin–orbit term, added at each k (spinor bases only).
    nonlocal_wells : ProjectedNonlocal or None
        The nonlocal wells, added at each k.
    kinetic_factor : float
        β of the kinetic term (:attr:`~bandpert.planewave.model.PlaneWaveModel.kinetic_factor`).
    """

    h0_eV: np.ndarray
    q_invA: np.ndarray
    spin_orbit: ProjectedSpinOrbit | None = None
    kinetic_factor: float = 1.0
    nonlocal_wells: ProjectedNonlocal | None = None

    @property
    def k_terms(self) -> tuple:
        """The terms built and projected at each k (spin–orbit, nonlocal wells)."""
        return tuple(t for t in (self.spin_orbit, self.nonlocal_wells) if t is not None)

    @property
    def kinetic_constant_eV_A2(self) -> float:
        """β ħ²/2m0 (eV Å²)."""
        return self.kinetic_factor * HBAR2_OVER_2M0_EV_A2

    @property
    def size(self) -> int:
        """Dimension of the basis."""
        return int(self.h0_eV.shape[0])

    def hamiltonians(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """(n_k, n, n) H(k) without the |k|² term (a shift of every level, added by callers)."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        dtype = complex if self.k_terms else self.h0_eV.dtype
        h = np.empty((len(k), self.size, self.size), dtype=dtype)
        h[:] = self.h0_eV
        if self.q_invA.ndim == 3:
            h += 2.0 * self.kinetic_constant_eV_A2 * np.tensordot(k, self.q_invA, axes=(1, 0))
        else:
            idx = np.arange(self.size)
            h[:, idx, idx] += 2.0 * self.kinetic_constant_eV_A2 * (k @ self.q_invA)
        for term in self.k_terms:
            h += term.matrices(k)
        return h

    def _blocks(self, n_k: int):
        per_k = self.size * self.size * self.h0_eV.itemsize
        block = max(1, min(n_k, BLOCK_BYTES // per_k))
        return range(0, n_k, block), block

    def _check(self, n_bands: int) -> None:
        if not 1 <= n_bands <= self.size:
            raise InputError(f"{n_bands} bands asked for from a basis of {self.size} states; "
                             f"expected 1 to {self.size}", key="bands")

    def eigenvalues(self, k_cart_invA: np.ndarray, n_bands: int) -> np.ndarray:
        """Lowest ``n_bands`` eigenvalues of H(k), ascending, (n_k, n_bands) in eV.

        One batched :func:`numpy.linalg.eigvalsh` call per block of k-points (LAPACK divide
        and conquer on each matrix); the blocks bound the memory.
        """
        self._check(n_bands)
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        out = np.empty((len(k), n_bands))
        starts, block = self._blocks(len(k))
        for s in starts:
            kb = k[s:s + block]
            w = np.linalg.eigvalsh(self.hamiltonians(kb))[:, :n_bands]
            out[s:s + len(kb)] = w + self.kinetic_constant_eV_A2 * np.einsum("ki,ki->k", kb,
                                                                              kb)[:, None]
        return out

    def eigensystem(self, k_cart_invA: np.ndarray, n_bands: int
                    ) -> tuple[np.ndarray, np.ndarray]:
        """Lowest ``n_bands`` eigenpairs of H(k) at a block of k-points.

        Returns
        -------
        energies_eV : numpy.ndarray
            (n_k, n_bands), ascending.
        vectors : numpy.ndarray
            (n_k, n, n_bands) orthonormal eigenvectors (columns) in this basis.
        """
        self._check(n_bands)
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        w, c = np.linalg.eigh(self.hamiltonians(k))
        shift = self.kinetic_constant_eV_A2 * np.einsum("ki,ki->k", k, k)[:, None]
        return w[:, :n_bands] + shift, c[:, :, :n_bands]

    def momentum(self, k_cart_invA: np.ndarray, vectors: np.ndarray) -> np.ndarray:
        """Velocity matrix elements as (m0/ħ²)⟨n|∂H/∂k|m⟩ between eigenvectors, (n_k, d, n_b, n_b).

        In Å⁻¹: for the local model this is β⟨n|k + G|m⟩ (β the kinetic factor; p_nm =
        ħ⟨n|k + G|m⟩), exact in this basis (H is quadratic in k with the k² term β ħ²k²/2m0).
        With spin–orbit coupling or nonlocal wells the velocity is (1/ħ)∂H/∂k, not p/m0: the
        terms (m0/ħ²)⟨n|∂H_so/∂k|m⟩ and (m0/ħ²)⟨n|∂V_NL/∂k|m⟩ are added, from central
        differences of the projected terms (step :data:`VELOCITY_STEP_INVA`, error O(step²)).
        """
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        if self.q_invA.ndim == 2:  # plane waves: Q diagonal
            qc = self.q_invA[None, :, :, None] * vectors[:, None, :, :]
        else:
            qc = np.einsum("iab,kbm->kiam", self.q_invA, vectors)
        out = np.einsum("kan,kiam->kinm", vectors.conj(), qc)
        eye = np.eye(vectors.shape[2])
        out = self.kinetic_factor * (out + k[:, :, None, None] * eye)
        h = VELOCITY_STEP_INVA
        for term in self.k_terms:
            for axis in range(k.shape[1]):
                step = np.zeros(k.shape[1])
                step[axis] = h
                d = (term.matrices(k + step) - term.matrices(k - step)) / (2.0 * h)
                out[:, axis] += np.einsum("kan,kab,kbm->knm", vectors.conj(), d, vectors,
                                          optimize=True) / (2.0 * HBAR2_OVER_2M0_EV_A2)
        return out

    def project(self, basis: np.ndarray) -> KPolynomial:
        """The same polynomial on the orthonormal columns of ``basis`` (n, n_r): B†H0B, B†QB."""
        b = np.asarray(basis)
        bh = b.conj().T
        h0 = bh @ self.h0_eV @ b
        if self.q_invA.ndim == 2:  # plane waves: Q diagonal
            q = np.stack([(bh * qi) @ b for qi in self.q_invA])
        else:
            q = np.einsum("ab,ibc,cd->iad", bh, self.q_invA, b, optimize=True)
        so = None if self.spin_orbit is None else self.spin_orbit.project(b)
        wells = None if self.nonlocal_wells is None else self.nonlocal_wells.project(b)
        return KPolynomial(h0_eV=0.5 * (h0 + h0.conj().T),
                           q_invA=0.5 * (q + np.swapaxes(q, 1, 2).conj()), spin_orbit=so,
                           kinetic_factor=self.kinetic_factor, nonlocal_wells=wells)


def k_polynomial(model: PlaneWaveModel) -> KPolynomial:
    """The fixed-basis plane-wave model as H0, Q (:class:`KPolynomial`).

    H0 = V + diag(β ħ²|G|²/2m0) and Q_i = diag(G_i) on the model's plane waves, so that
    H0 + β(ħ²/m0) k·Q + β(ħ²/2m0)|k|² equals ``model.hamiltonian(k)`` at every k (β the
    model's kinetic factor, 1 for the free-electron mass). With
    spin–orbit coupling on spinor plane waves: 1₂ ⊗ H0, Q ⊗ 1₂ and the term
    :class:`ProjectedSpinOrbit` added per k; nonlocal wells, :class:`ProjectedNonlocal`, per k
    too (H(k) is then not a polynomial in k, but the same sum of projected matrices).

    Parameters
    ----------
    model : PlaneWaveModel

    Returns
    -------
    KPolynomial
    """
    g = model.basis.g_cart_invA
    h0 = np.array(model.potential_eV, copy=True)
    idx = np.arange(model.size)
    h0[idx, idx] += model.kinetic_constant_eV_A2 * np.einsum("gi,gi->g", g, g)
    beta = model.kinetic_factor
    wells = None if model.nonlocal_term is None else ProjectedNonlocal(model)
    if model.spin_orbit is None:
        return KPolynomial(h0_eV=h0, q_invA=np.ascontiguousarray(g.T), kinetic_factor=beta,
                           nonlocal_wells=wells)
    n = model.size
    spinor = np.zeros((2 * n, 2 * n), dtype=complex)
    spinor[:n, :n] = h0
    spinor[n:, n:] = h0
    return KPolynomial(h0_eV=spinor, q_invA=np.ascontiguousarray(np.tile(g.T, (1, 2))),
                       spin_orbit=ProjectedSpinOrbit(model), kinetic_factor=beta,
                       nonlocal_wells=wells)
