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

#: Largest set of G enumerated at once (wider sets than a model's basis are built for the fit of
#: form factors and for k-centred bases): checked on the estimated count before any allocation.
MAX_ENUMERATED = 8 * MAX_BASIS

#: Largest box of Miller indices searched for the sphere (about 120 MB of integers and vectors).
MAX_SEARCH_BOX = 5_000_000


def estimated_basis_size(reciprocal_invA: np.ndarray, cutoff_eV: float) -> float:
    """Number of G with ħ²|G|²/2m0 ≤ cutoff, estimated before any G is enumerated.

    The measure of the sphere |G| ≤ G_max (length 2G, area πG², volume 4πG³/3) over that of the
    reciprocal cell |det B|, with G_max widened by the cell's longest vector so that the
    estimate bounds the count from above for small spheres too (common practice, no source).

    Parameters
    ----------
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors as rows (Å⁻¹).
    cutoff_eV : float
        Kinetic-energy cutoff in eV.

    Returns
    -------
    float
        The estimate (may be ``inf`` for absurd inputs; never raises).
    """
    b = np.asarray(reciprocal_invA, dtype=float)
    d = b.shape[0]
    with np.errstate(all="ignore"):
        g = np.sqrt(max(float(cutoff_eV), 0.0) / HBAR2_OVER_2M0_EV_A2)
        g = g + float(np.max(np.linalg.norm(b, axis=1)))
        measure = {1: 2.0 * g, 2: np.pi * g**2, 3: 4.0 * np.pi * g**3 / 3.0}[d]
        cell = abs(float(np.linalg.det(b)))
        return float(measure / cell) if cell > 0 else float("inf")


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
    estimate = estimated_basis_size(b, cutoff_eV)
    if not estimate <= MAX_ENUMERATED:
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV holds about {estimate:.3g} plane waves "
                         f"on this lattice; expected a cutoff giving at most {MAX_BASIS}",
                         key="basis.cutoff_eV")
    g_max = np.sqrt(cutoff_eV / HBAR2_OVER_2M0_EV_A2)
    # |m_i| = |G·a_i|/2π ≤ |G| |a_i|/2π with a_i the direct vectors
    a_norms = np.linalg.norm(2.0 * np.pi * np.linalg.inv(b).T, axis=1)
    n_max_float = np.ceil(g_max * a_norms / (2.0 * np.pi))
    n_total = float(np.prod(2.0 * n_max_float + 1.0))
    if not n_total <= MAX_SEARCH_BOX:
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV needs a search over {n_total:.3g} "
                         f"lattice vectors on this very oblique cell; expected at most "
                         f"{MAX_SEARCH_BOX:.0e} (a smaller cutoff)", key="basis.cutoff_eV")
    n_max = n_max_float.astype(int)
    axes = [np.arange(-n, n + 1) for n in n_max]
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, d)
    g = grid @ b
    g2 = np.einsum("ij,ij->i", g, g)
    keep = g2 * HBAR2_OVER_2M0_EV_A2 <= cutoff_eV * (1 + 1e-12)
    grid, g, g2 = grid[keep], g[keep], g2[keep]
    order = np.lexsort((*grid.T[::-1], np.round(g2, 10)))
    return PlaneWaveBasis(miller=grid[order], g_cart_invA=g[order], cutoff_eV=float(cutoff_eV))


def k_centred_basis(reciprocal_invA: np.ndarray, cutoff_eV: float,
                    k_cart_invA: np.ndarray) -> PlaneWaveBasis:
    """All G with ħ²|k+G|²/2m0 ≤ ``cutoff_eV``: the basis centred on k.

    Every operation of the little group of k maps k+G onto some k+G' of the same length, so
    this set is invariant under the little group and keeps every degeneracy its symmetry
    requires (Bouckaert, Smoluchowski & Wigner, Phys. Rev. 50, 58 (1936)); a Γ-centred set
    |G| ≤ G_max does not at a zone-boundary k. Sorted by |k+G| then by Miller index.

    Parameters
    ----------
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors as rows (Å⁻¹).
    cutoff_eV : float
        Kinetic-energy cutoff on ħ²|k+G|²/2m0 (eV).
    k_cart_invA : numpy.ndarray
        (d,) Cartesian k (Å⁻¹).

    Returns
    -------
    PlaneWaveBasis
    """
    k = np.asarray(k_cart_invA, dtype=float)
    g_max = np.sqrt(cutoff_eV / HBAR2_OVER_2M0_EV_A2)
    wide = plane_wave_basis(reciprocal_invA,
                            HBAR2_OVER_2M0_EV_A2 * (g_max + np.linalg.norm(k)) ** 2)
    kg = wide.g_cart_invA + k
    e = HBAR2_OVER_2M0_EV_A2 * np.einsum("ij,ij->i", kg, kg)
    keep = np.flatnonzero(e <= cutoff_eV * (1 + 1e-12))
    keep = keep[np.lexsort((*wide.miller[keep].T[::-1], np.round(e[keep], 10)))]
    return PlaneWaveBasis(miller=wide.miller[keep], g_cart_invA=wide.g_cart_invA[keep],
                          cutoff_eV=float(cutoff_eV))
