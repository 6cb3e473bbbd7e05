"""H(k) of a local plane-wave model on one fixed basis, as a polynomial in k.

On a fixed set of plane waves {G} the local model is exactly quadratic in k:

    H(k) = H0 + (ħ²/m0) Σ_i k_i Q_i + (ħ²/2m0) |k|² 1,
    H0 = V + diag(ħ²|G|²/2m0),  Q_i = diag(G_i),

and p = ħ(k + G) is diagonal in plane waves, so the velocity is (1/ħ) ∂H/∂k = (ħ/m0)(k + Q).
The same three pieces survive any change to another orthonormal basis B (columns in plane-wave
coefficients): H0 → B†H0B, Q_i → B†Q_iB, the |k|² term unchanged. This is what makes the
reduced-basis interpolation of :mod:`bandpert.physics.reduced_basis` cheap: the small matrices are
built once and H(k) at any k is a sum of four of them (E. L. Shirley, Phys. Rev. B 54, 16464
(1996); M. Cardona and F. H. Pollak, Phys. Rev. 142, 530 (1966) for k·p over the whole zone).

Terms that are not polynomial in k (spin–orbit or nonlocal projectors, whose radial factors
depend on |k + G|) do not fit this form: they would be projected onto the basis at each k.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..units import HBAR2_OVER_2M0_EV_A2
from .model import PlaneWaveModel

#: Bytes of Hamiltonians held at once when a block of k-points is diagonalised together.
BLOCK_BYTES = 16 * 2**20


@dataclass(frozen=True)
class KPolynomial:
    """H(k) = H0 + (ħ²/m0) k·Q + (ħ²/2m0)|k|² on one fixed orthonormal basis.

    Attributes
    ----------
    h0_eV : numpy.ndarray
        (n, n) Hermitian H(k = 0) in eV.
    q_invA : numpy.ndarray
        (d, n, n) Hermitian matrices of the operator G (Å⁻¹), or (d, n) their diagonals when
        the basis is plane waves; the momentum is p = ħ(k + Q).
    """

    h0_eV: np.ndarray
    q_invA: np.ndarray

    @property
    def size(self) -> int:
        """Dimension of the basis."""
        return int(self.h0_eV.shape[0])

    def hamiltonians(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """(n_k, n, n) H(k) without the |k|² term (a shift of every level, added by callers)."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        h = np.empty((len(k), self.size, self.size), dtype=self.h0_eV.dtype)
        h[:] = self.h0_eV
        if self.q_invA.ndim == 3:
            h += 2.0 * HBAR2_OVER_2M0_EV_A2 * np.tensordot(k, self.q_invA, axes=(1, 0))
        else:
            idx = np.arange(self.size)
            h[:, idx, idx] += 2.0 * HBAR2_OVER_2M0_EV_A2 * (k @ self.q_invA)
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
            out[s:s + len(kb)] = w + HBAR2_OVER_2M0_EV_A2 * np.einsum("ki,ki->k", kb, kb)[:, None]
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
        shift = HBAR2_OVER_2M0_EV_A2 * np.einsum("ki,ki->k", k, k)[:, None]
        return w[:, :n_bands] + shift, c[:, :, :n_bands]

    def momentum(self, k_cart_invA: np.ndarray, vectors: np.ndarray) -> np.ndarray:
        """Matrix elements ⟨n|k + G|m⟩ between eigenvectors, (n_k, d, n_b, n_b) in Å⁻¹.

        p_nm = ħ⟨n|k + G|m⟩; the velocity is (ħ/m0)⟨n|k + G|m⟩ = (1/ħ)⟨n|∂H/∂k|m⟩ exactly in
        this basis (H is quadratic in k with the free-electron k² term).
        """
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        if self.q_invA.ndim == 2:  # plane waves: Q diagonal
            qc = self.q_invA[None, :, :, None] * vectors[:, None, :, :]
        else:
            qc = np.einsum("iab,kbm->kiam", self.q_invA, vectors)
        out = np.einsum("kan,kiam->kinm", vectors.conj(), qc)
        eye = np.eye(vectors.shape[2])
        return out + k[:, :, None, None] * eye

    def project(self, basis: np.ndarray) -> KPolynomial:
        """The same polynomial on the orthonormal columns of ``basis`` (n, n_r): B†H0B, B†QB."""
        b = np.asarray(basis)
        bh = b.conj().T
        h0 = bh @ self.h0_eV @ b
        if self.q_invA.ndim == 2:  # plane waves: Q diagonal
            q = np.stack([(bh * qi) @ b for qi in self.q_invA])
        else:
            q = np.einsum("ab,ibc,cd->iad", bh, self.q_invA, b, optimize=True)
        return KPolynomial(h0_eV=0.5 * (h0 + h0.conj().T),
                           q_invA=0.5 * (q + np.swapaxes(q, 1, 2).conj()))


def k_polynomial(model: PlaneWaveModel) -> KPolynomial:
    """The fixed-basis plane-wave model as H0, Q (:class:`KPolynomial`).

    H0 = V + diag(ħ²|G|²/2m0) and Q_i = diag(G_i) on the model's plane waves, so that
    H0 + (ħ²/m0) k·Q + (ħ²/2m0)|k|² equals ``model.hamiltonian(k)`` at every k.

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
    h0[idx, idx] += HBAR2_OVER_2M0_EV_A2 * np.einsum("gi,gi->g", g, g)
    return KPolynomial(h0_eV=h0, q_invA=np.ascontiguousarray(g.T))
