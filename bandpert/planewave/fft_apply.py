"""The local potential applied to plane-wave vectors by FFT, without the dense matrix V.

    (V ψ)(G) = Σ_G' V(G − G') ψ(G')

is a convolution over the reciprocal lattice. With ψ placed on a periodic grid of Miller
indices, taken to real space (ψ(r) = Σ_G ψ(G) e^{iG·r} at the grid points), multiplied by V(r)
and taken back, the discrete Fourier transform gives the circular convolution

    c(m) = Σ_m' V((m − m') mod N) ψ(m'),

which equals the sum above at every G of the basis when no two differences G − G' that occur
fold onto one grid point. For plane waves with |m_i| ≤ M_i and a potential with V(G) = 0
beyond |m_i| > R_i (R_i ≤ 2M_i), a grid of N_i ≥ 2M_i + R_i + 1 points per axis is enough: two
differences d ≠ d' that fold together would need |d − d'| ≥ N_i, but |d| ≤ 2M_i and |d'| ≤ R_i.
The identity is exact (rounding only; common practice, no source). An empirical
pseudopotential has V(G) on a few shells only (silicon: R = 2 against M = 9 at 2900 plane
waves), so the grid is much smaller than the 4M + 1 points a potential of full range needs.

Cost per vector: two FFTs of the grid, O(N log N), against O(n) memory; the dense product is
O(n²) with an n × n matrix held.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.fft

from ..input.material import Material
from .potential import fourier_coefficients


@dataclass(frozen=True)
class FFTPotential:
    """V(r) on a periodic grid of Miller indices, for products V ψ by FFT.

    Attributes
    ----------
    shape : tuple of int
        Grid points per reciprocal axis (N_1, …, N_d).
    potential_r_eV : numpy.ndarray
        V(r) = Σ_G V(G) e^{iG·r} at the grid points (real: V(−G) = V(G)*), shape ``shape``.
    reach : numpy.ndarray
        (d,) largest |m_i| with V(G) ≠ 0 that the grid holds.
    """

    shape: tuple[int, ...]
    potential_r_eV: np.ndarray
    reach: np.ndarray

    def grid_index(self, miller: np.ndarray) -> np.ndarray:
        """Flat grid index of each plane wave (Miller indices taken modulo the grid)."""
        return np.ravel_multi_index(tuple(np.mod(np.asarray(miller), self.shape).T), self.shape)

    def apply(self, vectors: np.ndarray, index: np.ndarray) -> np.ndarray:
        """V ψ for each column ψ of ``vectors`` (coefficients on the plane waves ``index``).

        Parameters
        ----------
        vectors : numpy.ndarray
            (n, m) coefficients ψ(G) of m vectors on n plane waves (real or complex).
        index : numpy.ndarray
            (n,) flat grid indices of the plane waves (:meth:`grid_index`).

        Returns
        -------
        numpy.ndarray
            (n, m) V ψ; real when ``vectors`` is real (then V must be real symmetric, which the
            caller knows from the model).
        """
        if not np.iscomplexobj(vectors):
            # V maps real vectors to real ones: two real columns ride in one complex column
            # (a + ib ↦ Va + iVb), half the transforms
            m = vectors.shape[1]
            packed = vectors[:, 0::2].astype(complex)
            packed[:, : m // 2] += 1j * vectors[:, 1::2]
            both = self._apply_complex(packed, index)
            out = np.empty(vectors.shape)
            out[:, 0::2] = both.real
            out[:, 1::2] = both.imag[:, : m // 2]
            return out
        return self._apply_complex(vectors, index)

    def _apply_complex(self, vectors: np.ndarray, index: np.ndarray) -> np.ndarray:
        m = vectors.shape[1]
        axes = tuple(range(1, len(self.shape) + 1))
        grid = np.zeros((m, int(np.prod(self.shape))), dtype=complex)
        grid[:, index] = vectors.T
        grid = grid.reshape((m, *self.shape))
        psi_r = scipy.fft.ifftn(grid, axes=axes, norm="forward", overwrite_x=True)
        psi_r *= self.potential_r_eV
        out = scipy.fft.fftn(psi_r, axes=axes, norm="forward", overwrite_x=True)
        return out.reshape(m, -1)[:, index].T


def grid_shape(extent: np.ndarray, reach: np.ndarray) -> tuple[int, ...]:
    """Smallest fast FFT sizes N_i ≥ 2 M_i + R_i + 1 (plane waves |m_i| ≤ M_i, V to R_i)."""
    need = 2 * np.asarray(extent) + np.minimum(np.asarray(reach), 2 * np.asarray(extent)) + 1
    return tuple(int(scipy.fft.next_fast_len(int(x))) for x in need)


def _from_table(box: np.ndarray, values: np.ndarray, extent: np.ndarray) -> FFTPotential:
    """The grid potential from V(G) given on Miller indices ``box`` (zeros allowed)."""
    nonzero = values != 0
    d = box.shape[1]
    reach = (np.max(np.abs(box[nonzero]), axis=0) if nonzero.any()
             else np.zeros(d, dtype=int))
    reach = np.minimum(reach, 2 * np.asarray(extent))
    shape = grid_shape(extent, reach)
    inside = np.all(np.abs(box) <= reach, axis=1)
    v_grid = np.zeros(shape, dtype=complex)
    v_grid[tuple(np.mod(box[inside], shape).T)] = values[inside]
    v_r = scipy.fft.ifftn(v_grid, norm="forward")
    # V(−G) = V(G)* (a Hermitian potential matrix) makes V(r) real
    return FFTPotential(shape=shape, potential_r_eV=np.ascontiguousarray(v_r.real),
                        reach=np.asarray(reach))


def material_fft_potential(material: Material, extent: np.ndarray) -> FFTPotential:
    """V(r) of a material's local potential for plane waves with |m_i| ≤ ``extent[i]``.

    V(G) comes from :func:`~bandpert.planewave.potential.fourier_coefficients` on the box of
    differences |m_i| ≤ 2 M_i (the values the dense matrices gather); when every V(G) is real to
    1e-12 relative, the imaginary parts are dropped as the dense model does.

    Parameters
    ----------
    material : Material
    extent : numpy.ndarray
        (d,) largest |m_i| of the plane waves.

    Returns
    -------
    FFTPotential
    """
    extent = np.asarray(extent, dtype=int)
    axes = [np.arange(-2 * e, 2 * e + 1) for e in extent]
    box = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, len(extent))
    values = fourier_coefficients(material.local_spinless(), box)
    if np.max(np.abs(values.imag), initial=0.0) <= 1e-12 * max(
            1.0, np.max(np.abs(values), initial=0.0)):
        values = values.real.astype(complex)
    return _from_table(box, values, extent)


def matrix_fft_potential(miller: np.ndarray, potential_eV: np.ndarray) -> FFTPotential:
    """V(r) from a dense potential matrix V_ij = V(G_i − G_j) on the plane waves ``miller``.

    Every difference G_i − G_j that the products need is an entry of the matrix, so the grid
    reproduces V ψ of that matrix exactly (the matrix must be of the form V(G_i − G_j)).
    """
    miller = np.asarray(miller)
    extent = np.max(np.abs(miller), axis=0)
    width = 4 * extent + 1
    strides = np.cumprod(np.r_[1, width[::-1][:-1]])[::-1]
    codes = (miller + 2 * extent) @ strides  # shifted so that differences are ≥ 0 codes
    offset = int((2 * extent) @ strides)
    diff = (codes[:, None] - codes[None, :] + offset).reshape(-1)
    unique, first = np.unique(diff, return_index=True)
    box = np.stack(np.unravel_index(unique, tuple(width)), axis=1) - 2 * extent
    values = np.asarray(potential_eV).reshape(-1)[first].astype(complex)
    return _from_table(box, values, extent)
