"""The plane-wave basis: reciprocal-lattice vectors G below a kinetic-energy cutoff.

The basis is a set of G with ħ²|G|²/2m0 ≤ cutoff (Γ-centred). Its size is checked against
:data:`MAX_BASIS` before any matrix is allocated: the sizes come from the input (cutoff, lattice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..units import HBAR2_OVER_2M0_EV_A2

#: Largest basis the tool will build (a 4000 × 4000 complex matrix is 256 MB).
MAX_BASIS = 4000


@dataclass(frozen=True)
class PlaneWaveBasis:
    """Reciprocal-lattice vectors G with ħ²|G|²/2m0 ≤ cutoff.

    Attributes
    ----------
    miller : numpy.ndarray
        (n_G, d) integer coordinates of G in the reciprocal primitive basis.
    g_cart_invA : numpy.ndarray
        (n_G, d) Cartesian G in Å⁻¹.
    cutoff_eV : float
        Kinetic-energy cutoff.
    n_components : int
        Spinor components per plane wave (1: spinless).
    """

    miller: np.ndarray
    g_cart_invA: np.ndarray
    cutoff_eV: float
    n_components: int = 1

    @property
    def size(self) -> int:
        """Dimension of the Hamiltonian (plane waves × components)."""
        return int(self.miller.shape[0] * self.n_components)


def plane_wave_basis(reciprocal_invA: np.ndarray, cutoff_eV: float) -> PlaneWaveBasis:
    """All G = Σ m_i b_i with ħ²|G|²/2m0 ≤ ``cutoff_eV``, sorted by |G| then by Miller index.

    Parameters
    ----------
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors as rows (Å⁻¹).
    cutoff_eV : float
        Kinetic-energy cutoff in eV.

    Returns
    -------
    PlaneWaveBasis
    """
    b = np.asarray(reciprocal_invA, dtype=float)
    d = b.shape[0]
    g_max = np.sqrt(cutoff_eV / HBAR2_OVER_2M0_EV_A2)
    # |m_i| = |G·a_i|/2π ≤ |G| |a_i|/2π with a_i the direct vectors
    a_norms = np.linalg.norm(2.0 * np.pi * np.linalg.inv(b).T, axis=1)
    n_max = np.ceil(g_max * a_norms / (2.0 * np.pi)).astype(int)
    n_total = int(np.prod(2 * n_max + 1))
    if n_total > 50_000_000:
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV needs a search over {n_total} lattice "
                         "vectors; expected a smaller cutoff", key="basis.cutoff_eV")
    axes = [np.arange(-n, n + 1) for n in n_max]
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, d)
    g = grid @ b
    g2 = np.einsum("ij,ij->i", g, g)
    keep = g2 * HBAR2_OVER_2M0_EV_A2 <= cutoff_eV * (1 + 1e-12)
    grid, g, g2 = grid[keep], g[keep], g2[keep]
    order = np.lexsort((*grid.T[::-1], np.round(g2, 10)))
    return PlaneWaveBasis(miller=grid[order], g_cart_invA=g[order], cutoff_eV=float(cutoff_eV))
