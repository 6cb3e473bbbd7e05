r"""One-band envelope functions along z with BenDaniel–Duke boundary conditions.

The operator is (BenDaniel & Duke, Phys. Rev. 152, 683 (1966))

    H ψ = V(z) ψ − (ħ²/2) d/dz [ (1/m(z)) dψ/dz ]      (electrons, m > 0),

which keeps ψ and (1/m) dψ/dz continuous at interfaces. For holes in the electron-energy
picture the kinetic term has the other sign, H = V(z) + (ħ²/2) d/dz (1/m) d/dz with the hole
mass m > 0, and the levels are the highest eigenvalues.

Discretisation: finite differences on the cell-centred grid of :mod:`.grid` (interfaces on
half-nodes, the mass there from :func:`~.grid.half_node_inverse`), a symmetric tridiagonal
matrix, errors O(h²). Ends: a bounded structure has ψ = 0 at its two outer faces (the ghost
node beyond the end carries −ψ, which puts the zero exactly at the face); a periodic one has
ψ(z + d) = e^{iθ} ψ(z) with θ = q d, the Bloch phase of a superlattice of period d.

Solvers: bounded, the tridiagonal eigenproblem for the requested levels only
(:func:`scipy.linalg.eigh_tridiagonal` with an index range: linear memory, O(n) per level);
periodic, a sparse matrix with two corner elements and shift-invert Lanczos
(:func:`scipy.sparse.linalg.eigsh` about the lowest band edge).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.linalg
from numpy.typing import NDArray

from ..units import HBAR2_OVER_2M0_EV_A2 as C

__all__ = ["one_band_levels"]

FloatArray = NDArray[np.float64]


def one_band_levels(potential_eV: FloatArray, mass_m0: FloatArray, spacing_A: float,
                    n_levels: int, hole: bool = False, bloch_phase: float | None = None
                    ) -> tuple[FloatArray, NDArray]:
    """The lowest (electrons) or highest (holes) levels of the one-band operator.

    Parameters
    ----------
    potential_eV : ndarray (n,)
        Band edge on the nodes.
    mass_m0 : ndarray (n,)
        Band-edge mass on the nodes (positive; for holes the hole mass).
    spacing_A : float
    n_levels : int
        How many levels (at most n).
    hole : bool
        Hole band: the kinetic term lowers the energy; levels sorted from the top.
    bloch_phase : float, optional
        θ = q d of a periodic structure (None: bounded, ψ = 0 at the outer faces).

    Returns
    -------
    energies_eV : ndarray (n_levels,)
        Sorted upward for electrons, downward for holes.
    states : ndarray (n, n_levels)
        Envelope functions on the nodes, normalised to Σ|ψ_i|² h = 1 (Å⁻¹ for |ψ|²), real
        for a bounded structure.
    """
    v = np.asarray(potential_eV, dtype=float)
    m = np.asarray(mass_m0, dtype=float)
    n = v.size
    k = int(min(max(n_levels, 1), n))
    sign = -1.0 if hole else 1.0
    t = C / spacing_A**2
    if bloch_phase is None:
        inv = 2.0 / (m[:-1] + m[1:])
        diag = np.zeros(n)
        diag[:-1] += inv
        diag[1:] += inv
        diag[0] += 2.0 / m[0]
        diag[-1] += 2.0 / m[-1]
        d = sign * v + t * diag
        e = -t * inv
        vals, vecs = scipy.linalg.eigh_tridiagonal(d, e, select="i", select_range=(0, k - 1))
    else:
        inv = 2.0 / (m + np.roll(m, -1))  # between node i and i + 1 (the last wraps)
        d = sign * v + t * (inv + np.roll(inv, 1))
        phase = np.exp(1j * bloch_phase)
        off = -t * inv[:-1]
        a = scipy.sparse.diags([off, d, off], [-1, 0, 1], shape=(n, n), format="lil",
                               dtype=complex)
        a[n - 1, 0] += -t * inv[-1] * phase  # ψ_n = e^{iθ} ψ_0
        a[0, n - 1] += -t * inv[-1] * np.conj(phase)
        a = a.tocsc()
        if n <= 64 or k >= n - 1:
            vals, vecs = np.linalg.eigh(a.toarray())
            vals, vecs = vals[:k], vecs[:, :k]
        else:
            shift = float(d.min() - 4.0 * t * inv.max() - 1e-3)
            vals, vecs = scipy.sparse.linalg.eigsh(a, k=k, sigma=shift, which="LM")
            order = np.argsort(vals)
            vals, vecs = vals[order], vecs[:, order]
    vecs = vecs / np.sqrt(spacing_A * np.sum(np.abs(vecs) ** 2, axis=0))
    return sign * vals, vecs
