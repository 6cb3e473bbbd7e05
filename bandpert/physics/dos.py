"""Density of states on a uniform k-mesh: linear tetrahedra (exact for linear bands) or Gaussians.

The mesh is the one of :mod:`bandpert.crystal.kmesh` (:class:`~bandpert.crystal.kmesh.KMesh`):
energies computed on its irreducible points unfold onto the full grid for the tetrahedra.

Linear tetrahedron method (P. E. Blöchl, O. Jepsen and O. K. Andersen, Phys. Rev. B 49, 16223
(1994), Sec. II–III and Appendix A): every sub-cube of the periodic grid is cut into six
tetrahedra that share the cube's shortest main diagonal (in Cartesian space); inside a tetrahedron
each band is interpolated linearly between its four corners, which makes the number of states
below ε a piecewise cubic in ε and the density a piecewise quadratic, both in closed form. In 2D
the grid squares are cut into two triangles along the shorter diagonal, in 1D the grid steps are
segments; the same construction one and two dimensions down. No Blöchl correction is applied:
the numbers are those of the linear interpolation itself.

Everything is per primitive cell and counts both spins: a band holds two electrons.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.optimize
import scipy.special

from ..crystal.kmesh import KMesh
from ..errors import InputError

#: Electrons per band and k-point (spin degeneracy of the spinless models).
SPIN_DEGENERACY = 2

#: The one default Gaussian width σ (eV), for the Fermi level and the DOS of every command.
DEFAULT_SMEARING_EV = 0.05

#: Fermi-level methods: the linear tetrahedron method (the default) or Gaussian smearing.
FERMI_METHODS = ("tetrahedron", "gaussian")

#: Largest number of (simplex, energy) pairs evaluated at once (bounds the working memory).
MAX_PAIRS = 2**21

#: Fermi levels are located to this accuracy (eV).
FERMI_TOLERANCE_EV = 1e-10

#: A Gaussian-smeared Fermi level must lie this many widths below the bottom of the highest band
#: given, so that the tails of the bands not computed are negligible (½ erfc(3) ≈ 1e-5).
GAUSSIAN_MARGIN_WIDTHS = 3.0


@dataclass(frozen=True)
class DensityOfStates:
    """Density of states on an energy grid, per primitive cell, both spins.

    Attributes
    ----------
    energies_eV : numpy.ndarray
        (n_E,) energy grid (absolute energies, the model's zero).
    dos_per_eV : numpy.ndarray
        (n_E,) states per eV per primitive cell, both spins.
    integrated : numpy.ndarray
        (n_E,) electrons per primitive cell in states below each grid energy (both spins).
    method : str
        "tetrahedron" or "gaussian".
    smearing_eV : float or None
        Gaussian width σ; None for the tetrahedron method.
    """

    energies_eV: np.ndarray
    dos_per_eV: np.ndarray
    integrated: np.ndarray
    method: str
    smearing_eV: float | None


# ------------------------------------------------------------------------------------------------
# simplices of the grid
# ------------------------------------------------------------------------------------------------


def _corner_offsets(d: int) -> np.ndarray:
    """The 2^d corners of a grid cell as 0/1 offsets; corner c has bits c_j = (c >> j) & 1."""
    return np.array([[(c >> j) & 1 for j in range(d)] for c in range(2**d)], dtype=np.int64)


def _simplex_corners(mesh: KMesh) -> np.ndarray:
    """Full-grid indices of the corners of every simplex of the periodic grid.

    3D: each cell is split into the 6 tetrahedra o → o⊕e_σ0 → o⊕e_σ0⊕e_σ1 → o⊕(1,1,1) over the
    permutations σ of the axes, where o → o⊕(1,1,1) is the shortest of the cell's four main
    diagonals in Cartesian space (Blöchl, Jepsen & Andersen 1994, Sec. III). 2D: two triangles
    sharing the shorter diagonal; 1D: the segment.

    Returns
    -------
    numpy.ndarray
        (n_simplices, d + 1) indices into the full grid (C order); every simplex has volume
        1/n_simplices of the zone.
    """
    shape = np.array(mesh.shape)
    d = len(shape)
    base = np.stack(np.meshgrid(*[np.arange(n) for n in shape], indexing="ij"),
                    axis=-1).reshape(-1, d)
    offsets = _corner_offsets(d)
    # the diagonal from corner o to corner o ⊕ (1, …, 1): vector Σ_j (1 − 2 o_j) b_j / n_j
    step = mesh.reciprocal_invA / shape[:, None]
    starts = np.arange(2 ** (d - 1))  # one end of each main diagonal (o_{d-1} = 0)
    lengths = [np.linalg.norm((1 - 2 * offsets[o]) @ step) for o in starts]
    o = int(starts[int(np.argmin(lengths))])
    paths = []
    for perm in itertools.permutations(range(d)):
        corner, path = o, [o]
        for axis in perm:
            corner ^= 1 << axis
            path.append(corner)
        paths.append(path)
    paths = np.array(paths)  # (d!, d + 1) corner numbers
    idx = np.mod(base[:, None, :] + offsets[None, :, :], shape)  # (N, 2^d, d)
    flat = np.ravel_multi_index(tuple(np.moveaxis(idx, -1, 0)), tuple(shape))  # (N, 2^d)
    return flat[:, paths].reshape(-1, d + 1)


#: Sorted corner energies closer than this (eV) are made equal: a degenerate pair then takes
#: the exact degenerate formulas instead of dividing by a difference near 0 (which could
#: overflow for differences of, say, 1e-300 eV).
DEGENERATE_CORNERS_EV = 1e-12


def _snap_degenerate(e: np.ndarray) -> np.ndarray:
    """Sorted corners (..., m) with near-equal neighbours set equal (cumulatively)."""
    e = np.array(e, dtype=float, copy=True)
    for j in range(1, e.shape[-1]):
        close = e[..., j] - e[..., j - 1] < DEGENERATE_CORNERS_EV
        e[..., j] = np.where(close, e[..., j - 1], e[..., j])
    return e


def simplex_occupation(corners_eV: np.ndarray,
                       energy_eV: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fraction of a linear simplex below ε and its density per unit energy.

    With the corner energies sorted, e1 ≤ e2 ≤ … and e_ij = e_i − e_j, the band interpolated
    linearly across a tetrahedron fills the fraction (Blöchl, Jepsen & Andersen, Phys. Rev. B 49,
    16223 (1994), Appendix A, the integrated-weight formulas)

    - e1 ≤ ε < e2:  (ε − e1)³ / (e21 e31 e41)
    - e2 ≤ ε < e3:  [e21² + 3 e21 (ε − e2) + 3 (ε − e2)² − (e31 + e42)/(e32 e42) (ε − e2)³]
      / (e31 e41)
    - e3 ≤ ε < e4:  1 − (e4 − ε)³ / (e41 e42 e43)

    and 0 below e1, 1 from e4 on; the density is the ε-derivative of these. A triangle (three
    corners) fills (ε − e1)² / (e21 e31), then 1 − (e3 − ε)² / (e31 e32); a segment (two
    corners) fills (ε − e1) / e21. Each formula is used only where its interval is not empty,
    where its denominators are positive, so degenerate corners are exact too (the density is
    then a step or, for a flat simplex, a δ-function that a grid cannot show).

    Parameters
    ----------
    corners_eV : numpy.ndarray
        (..., m) corner energies, m = 2, 3 or 4 (in any order).
    energy_eV : numpy.ndarray
        Energies ε, broadcast against ``corners_eV[..., 0]``.

    Returns
    -------
    fraction : numpy.ndarray
        Fraction of the simplex with band energy below ε, in [0, 1].
    density : numpy.ndarray
        d(fraction)/dε in eV⁻¹.
    """
    e = _snap_degenerate(np.sort(np.asarray(corners_eV, dtype=float), axis=-1))
    x = np.asarray(energy_eV, dtype=float)
    e, x = np.broadcast_arrays(e, x[..., None])
    x = x[..., 0]
    m = e.shape[-1]
    if m not in (2, 3, 4):
        raise ValueError(f"a simplex has 2, 3 or 4 corners, got {m}")
    fraction = np.where(x >= e[..., -1], 1.0, 0.0)
    density = np.zeros_like(x)
    safe = lambda v: np.where(v > 0, v, 1.0)  # denominators of an empty interval are unused
    if m == 2:
        e1, e2 = e[..., 0], e[..., 1]
        inside = (x >= e1) & (x < e2)
        e21 = safe(e2 - e1)
        fraction = np.where(inside, (x - e1) / e21, fraction)
        density = np.where(inside, 1.0 / e21, density)
        return fraction, density
    if m == 3:
        e1, e2, e3 = e[..., 0], e[..., 1], e[..., 2]
        e21, e31, e32 = safe(e2 - e1), safe(e3 - e1), safe(e3 - e2)
        low = (x >= e1) & (x < e2)
        high = (x >= e2) & (x < e3)
        fraction = np.where(low, (x - e1) ** 2 / (e21 * e31), fraction)
        density = np.where(low, 2.0 * (x - e1) / (e21 * e31), density)
        fraction = np.where(high, 1.0 - (e3 - x) ** 2 / (e31 * e32), fraction)
        density = np.where(high, 2.0 * (e3 - x) / (e31 * e32), density)
        return fraction, density
    e1, e2, e3, e4 = e[..., 0], e[..., 1], e[..., 2], e[..., 3]
    e21, e31, e41 = safe(e2 - e1), safe(e3 - e1), safe(e4 - e1)
    e32, e42, e43 = safe(e3 - e2), safe(e4 - e2), safe(e4 - e3)
    first = (x >= e1) & (x < e2)
    middle = (x >= e2) & (x < e3)
    last = (x >= e3) & (x < e4)
    u = x - e1
    fraction = np.where(first, u**3 / (e21 * e31 * e41), fraction)
    density = np.where(first, 3.0 * u**2 / (e21 * e31 * e41), density)
    u = x - e2
    d21 = e2 - e1
    c3 = (e31 + e42) / (e32 * e42)
    fraction = np.where(middle, (d21**2 + 3.0 * d21 * u + 3.0 * u**2 - c3 * u**3) / (e31 * e41),
                        fraction)
    density = np.where(middle, (3.0 * d21 + 6.0 * u - 3.0 * c3 * u**2) / (e31 * e41), density)
    u = e4 - x
    fraction = np.where(last, 1.0 - u**3 / (e41 * e42 * e43), fraction)
    density = np.where(last, 3.0 * u**2 / (e41 * e42 * e43), density)
    return fraction, density


def _region_polynomials(corners_eV: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The formulas of :func:`simplex_occupation` as polynomials, one per energy interval.

    On interval r (between sorted corners r and r + 1) the fraction is
    Σ_j a_rj u^j with u = ε − ref_r, the reference chosen inside or at the end of the interval
    so that the coefficients stay well scaled (e1, e2, e4 for a tetrahedron; e1, e3 for a
    triangle; e1 for a segment).

    Parameters
    ----------
    corners_eV : numpy.ndarray
        (M, m) sorted corner energies.

    Returns
    -------
    ref : numpy.ndarray
        (M, m − 1) reference energy of each interval.
    coef : numpy.ndarray
        (M, m − 1, 4) coefficients a_0 … a_3 of each interval.
    """
    e = corners_eV
    n, m = e.shape
    safe = lambda v: np.where(v > 0, v, 1.0)  # an empty interval is never evaluated
    coef = np.zeros((n, m - 1, 4))
    if m == 2:
        ref = e[:, :1].copy()
        coef[:, 0, 1] = 1.0 / safe(e[:, 1] - e[:, 0])
        return ref, coef
    if m == 3:
        e21, e31, e32 = (safe(e[:, 1] - e[:, 0]), safe(e[:, 2] - e[:, 0]),
                         safe(e[:, 2] - e[:, 1]))
        ref = e[:, [0, 2]].copy()
        coef[:, 0, 2] = 1.0 / (e21 * e31)
        coef[:, 1, 0] = 1.0
        coef[:, 1, 2] = -1.0 / (e31 * e32)
        return ref, coef
    e21, e31, e41 = (safe(e[:, 1] - e[:, 0]), safe(e[:, 2] - e[:, 0]), safe(e[:, 3] - e[:, 0]))
    e32, e42, e43 = (safe(e[:, 2] - e[:, 1]), safe(e[:, 3] - e[:, 1]), safe(e[:, 3] - e[:, 2]))
    d21 = e[:, 1] - e[:, 0]
    ref = e[:, [0, 1, 3]].copy()
    coef[:, 0, 3] = 1.0 / (e21 * e31 * e41)
    middle = 1.0 / (e31 * e41)
    coef[:, 1, 0] = d21**2 * middle
    coef[:, 1, 1] = 3.0 * d21 * middle
    coef[:, 1, 2] = 3.0 * middle
    coef[:, 1, 3] = -(e31 + e42) / (e32 * e42) * middle
    coef[:, 2, 0] = 1.0
    coef[:, 2, 3] = 1.0 / (e41 * e42 * e43)  # u = ε − e4 ≤ 0: 1 − (e4 − ε)³/(…)
    return ref, coef


def _accumulate(corners_eV: np.ndarray, grid_eV: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Σ over simplices of the occupied fraction and the density at sorted energies.

    Only the (simplex, energy) pairs with the energy inside the simplex's range are evaluated,
    from the polynomials of :func:`_region_polynomials`; the simplices entirely below an energy
    add 1 each through a cumulative count. The pairs are built in blocks of at most
    :data:`MAX_PAIRS`.

    Parameters
    ----------
    corners_eV : numpy.ndarray
        (M, m) corner energies, sorted along the last axis.
    grid_eV : numpy.ndarray
        (n_E,) energies, ascending.

    Returns
    -------
    fraction_sum, density_sum : numpy.ndarray
        (n_E,) each, unweighted sums over the M simplices.
    """
    corners_eV = _snap_degenerate(corners_eV)
    n_e = len(grid_eV)
    start = np.searchsorted(grid_eV, corners_eV[:, 0], side="left")
    stop = np.searchsorted(grid_eV, corners_eV[:, -1], side="left")
    fraction = np.cumsum(np.bincount(stop, minlength=n_e + 1))[:n_e].astype(float)
    density = np.zeros(n_e)
    length = stop - start
    busy = np.flatnonzero(length > 0)
    if busy.size == 0:
        return fraction, density
    corners = corners_eV[busy]
    start, length = start[busy], length[busy]
    ref, coef = _region_polynomials(corners)
    inner = corners[:, 1:-1]  # the breakpoints between intervals
    ends = np.cumsum(length)
    # split the busy simplices into blocks of about MAX_PAIRS pairs
    cuts = np.searchsorted(ends, np.arange(MAX_PAIRS, ends[-1], MAX_PAIRS), side="right")
    bounds = np.unique(np.concatenate(([0], cuts, [len(busy)])))
    for lo, hi in zip(bounds[:-1], bounds[1:], strict=False):
        lens = length[lo:hi]
        owner = np.repeat(np.arange(lo, hi), lens)
        first = np.cumsum(lens) - lens
        g = start[owner] + (np.arange(int(lens.sum())) - np.repeat(first, lens))
        x = grid_eV[g]
        region = np.sum(x[:, None] >= inner[owner], axis=1)
        u = x - ref[owner, region]
        a = coef[owner, region]
        f = a[:, 0] + u * (a[:, 1] + u * (a[:, 2] + u * a[:, 3]))
        dens = a[:, 1] + u * (2.0 * a[:, 2] + u * 3.0 * a[:, 3])
        fraction += np.bincount(g, weights=f, minlength=n_e)
        density += np.bincount(g, weights=dens, minlength=n_e)
    return fraction, density


def _check_energies(mesh: KMesh, energies_eV: np.ndarray) -> np.ndarray:
    e = np.asarray(energies_eV, dtype=float)
    if e.ndim != 2 or len(e) != len(mesh.k_frac) or e.shape[1] < 1:
        raise InputError(f"band energies of shape {e.shape} do not fit a mesh of "
                         f"{len(mesh.k_frac)} irreducible points; expected (n_irr, n_bands) = "
                         f"({len(mesh.k_frac)}, n_bands)", key="energies_eV")
    if not np.all(np.isfinite(e)):
        raise InputError("band energies contain NaN or infinity; expected finite numbers",
                         key="energies_eV")
    return e


def _check_grid(energy_grid_eV: np.ndarray) -> np.ndarray:
    grid = np.asarray(energy_grid_eV, dtype=float)
    if grid.ndim != 1 or grid.size < 2:
        raise InputError(f"an energy grid of shape {grid.shape}; expected a 1-D array of at "
                         "least 2 energies", key="energy grid")
    if not np.all(np.isfinite(grid)) or np.any(np.diff(grid) <= 0):
        raise InputError("the energy grid is not finite and strictly increasing; expected "
                         "ascending energies in eV", key="energy grid")
    return grid


def _band_simplices(mesh: KMesh, energies_eV: np.ndarray, lo_eV: float = -np.inf,
                    hi_eV: float = np.inf) -> tuple[list[np.ndarray], int, float]:
    """Sorted corner energies of the simplices, band by band, for the bands that matter.

    Bands wholly below ``lo_eV`` are only counted (each adds its full weight at every energy
    from ``lo_eV`` on); bands wholly at or above ``hi_eV`` are skipped.

    Returns
    -------
    corners : list of numpy.ndarray
        One (n_simplices, d + 1) array of sorted corner energies per band kept.
    n_below : int
        Bands wholly below ``lo_eV``.
    weight : float
        Weight of one simplex, 1/n_simplices.
    """
    full = mesh.unfold(energies_eV)  # (N, n_bands)
    index = _simplex_corners(mesh)
    lowest, highest = full.min(axis=0), full.max(axis=0)
    below = highest < lo_eV
    kept = [np.sort(full[:, n][index], axis=1) for n in range(full.shape[1])
            if not below[n] and lowest[n] < hi_eV]
    return kept, int(np.count_nonzero(below)), 1.0 / len(index)


def tetrahedron_count(mesh: KMesh, energies_eV: np.ndarray,
                      energy_eV: float | np.ndarray) -> float | np.ndarray:
    """Electrons per cell in states below ε, by linear tetrahedra (triangles, segments in 2D/1D).

    N(ε) = 2 Σ_bands Σ_T w_T n_T(ε) with w_T = 1/(number of simplices) and n_T the fraction of
    :func:`simplex_occupation` (Blöchl, Jepsen & Andersen, Phys. Rev. B 49, 16223 (1994)):
    exact for the linear interpolation of the bands between the grid points.

    Parameters
    ----------
    mesh : KMesh
    energies_eV : numpy.ndarray
        (n_irr, n_bands) band energies on ``mesh.k_frac``.
    energy_eV : float or numpy.ndarray
        Energies ε, any shape, any order.

    Returns
    -------
    float or numpy.ndarray
        Electrons per primitive cell (both spins), shaped like ``energy_eV``. Only exact where
        the bands given hold every state: below the bottom of the highest band given
        (:func:`band_energy_window`).
    """
    e = _check_energies(mesh, energies_eV)
    x = np.asarray(energy_eV, dtype=float)
    flat = x.ravel()
    if flat.size == 0:
        return np.zeros(x.shape)
    order = np.argsort(flat, kind="stable")
    x_sorted = flat[order]
    simplices, n_below, w = _band_simplices(mesh, e, x_sorted[0], x_sorted[-1] + 1.0)
    total = np.full(flat.size, float(n_below * round(1.0 / w)))
    for band in simplices:  # one band at a time: memory ∝ one band's simplices
        total += _accumulate(band, x_sorted)[0]
    out = np.empty(flat.size)
    out[order] = SPIN_DEGENERACY * w * total
    return float(out[0]) if x.ndim == 0 else out.reshape(x.shape)


def tetrahedron_dos(mesh: KMesh, energies_eV: np.ndarray,
                    energy_grid_eV: np.ndarray) -> DensityOfStates:
    """Density of states and integrated count by the linear tetrahedron method.

    The energies on the irreducible points are unfolded onto the full grid
    (``mesh.full_to_irreducible``); each grid cell is cut into simplices sharing its shortest
    Cartesian diagonal (:func:`_simplex_corners`: 6 tetrahedra in 3D, 2 triangles in 2D, a
    segment in 1D) and D(ε) = 2 Σ_bands Σ_T w_T dn_T/dε, N(ε) = 2 Σ_bands Σ_T w_T n_T(ε) with
    the closed forms of :func:`simplex_occupation` (Blöchl, Jepsen & Andersen, Phys. Rev. B 49,
    16223 (1994), Sec. II–III, Appendix A). The reciprocal vectors needed for the shortest
    diagonal are ``mesh.reciprocal_invA``.

    Parameters
    ----------
    mesh : KMesh
    energies_eV : numpy.ndarray
        (n_irr, n_bands) band energies on ``mesh.k_frac``.
    energy_grid_eV : numpy.ndarray
        (n_E,) strictly increasing energies.

    Returns
    -------
    DensityOfStates
        Point values of D at the grid energies (not bin averages) and the exact N there.
        A band that is flat across a whole simplex adds a step to N and nothing to D.
    """
    e = _check_energies(mesh, energies_eV)
    grid = _check_grid(energy_grid_eV)
    simplices, n_below, w = _band_simplices(mesh, e, grid[0], grid[-1] + 1.0)
    count = np.full(grid.size, float(n_below * round(1.0 / w)))
    dos = np.zeros(grid.size)
    for band in simplices:
        f, dens = _accumulate(band, grid)
        count += f
        dos += dens
    return DensityOfStates(grid, SPIN_DEGENERACY * w * dos, SPIN_DEGENERACY * w * count,
                           "tetrahedron", None)


def _check_smearing(smearing_eV: float | None) -> float:
    if smearing_eV is None or not np.isfinite(smearing_eV) or smearing_eV <= 0:
        raise InputError(f"a Gaussian width of {smearing_eV!r} eV; expected a positive number",
                         key="smearing_eV")
    return float(smearing_eV)


def _gaussian_count(energies_eV: np.ndarray, weights: np.ndarray, energy_eV: float,
                    sigma: float) -> float:
    occ = 0.5 * scipy.special.erfc((energies_eV - energy_eV) / sigma)
    return SPIN_DEGENERACY * float(np.sum(weights[:, None] * occ))


def gaussian_dos(energies_eV: np.ndarray, weights: np.ndarray, energy_grid_eV: np.ndarray,
                 smearing_eV: float) -> DensityOfStates:
    """Density of states with every level broadened into a Gaussian of width σ.

    D(ε) = 2 Σ_k w_k Σ_n exp(−(ε − E_nk)²/σ²) / (σ√π) and N(ε) = 2 Σ_k w_k Σ_n
    ½ erfc((E_nk − ε)/σ), its exact integral (common practice; the same occupation as
    :func:`fermi_level_from_count` with ``method="gaussian"``). σ is the width in the exponent,
    σ/√2 the standard deviation.

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n_k, n_bands) band energies.
    weights : numpy.ndarray
        (n_k,) k-point weights summing to 1 (e.g. ``KMesh.weights``).
    energy_grid_eV : numpy.ndarray
        (n_E,) strictly increasing energies.
    smearing_eV : float
        σ > 0.

    Returns
    -------
    DensityOfStates
    """
    e = np.asarray(energies_eV, dtype=float)
    w = np.asarray(weights, dtype=float)
    if e.ndim != 2 or w.shape != (len(e),):
        raise InputError(f"band energies of shape {e.shape} and weights of shape {w.shape}; "
                         "expected (n_k, n_bands) and (n_k,)", key="energies_eV")
    grid = _check_grid(energy_grid_eV)
    sigma = _check_smearing(smearing_eV)
    levels = e.ravel()
    lw = np.repeat(w, e.shape[1])
    dos = np.zeros(grid.size)
    count = np.zeros(grid.size)
    block = max(1, MAX_PAIRS // max(1, levels.size))
    for lo in range(0, grid.size, block):  # blocks of energies bound the memory
        x = (grid[lo:lo + block, None] - levels[None, :]) / sigma
        dos[lo:lo + block] = np.exp(-(x**2)) @ lw / (sigma * np.sqrt(np.pi))
        count[lo:lo + block] = 0.5 * scipy.special.erfc(-x) @ lw
    return DensityOfStates(grid, SPIN_DEGENERACY * dos, SPIN_DEGENERACY * count, "gaussian",
                           sigma)


def band_energy_window(energies_eV: np.ndarray, margin_eV: float = 0.0) -> tuple[float, float]:
    """Energies over which the bands given hold every state on the mesh.

    Below the bottom of the highest band given, every state is in one of the bands computed
    (the bands are sorted at each k, so a band not computed lies above it at every k); above
    it, a DOS or a count from these bands misses states.

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n_k, n_bands) band energies, sorted at each k.
    margin_eV : float
        Taken off both ends (lower end lowered, upper end lowered) for a plot's edge.

    Returns
    -------
    (float, float)
        Lowest band energy minus the margin, and the bottom of the highest band minus the margin.
    """
    e = np.asarray(energies_eV, dtype=float)
    return float(e.min() - margin_eV), float(e[:, -1].min() - margin_eV)


class _Counter:
    """N(ε) from a set of sorted simplices, cheap at one ε; shrinks to a bracket as it narrows."""

    def __init__(self, corners_eV: np.ndarray, weight: float, base: float = 0.0):
        self.corners = corners_eV
        self.weight = weight
        self.base = base

    def __call__(self, energy_eV: float) -> float:
        c = self.corners
        below = np.count_nonzero(c[:, -1] <= energy_eV)
        inside = (c[:, 0] < energy_eV) & (energy_eV < c[:, -1])
        f, _ = simplex_occupation(c[inside], energy_eV)
        return self.base + SPIN_DEGENERACY * self.weight * (below + float(f.sum()))

    def restrict(self, lo: float, hi: float) -> None:
        """Keep the simplices overlapping (lo, hi); those below lo go into the base count."""
        c = self.corners
        done = c[:, -1] <= lo
        self.base += SPIN_DEGENERACY * self.weight * np.count_nonzero(done)
        self.corners = c[~done & (c[:, 0] < hi)]


def _find_level(count: Callable[[float], float], lo: float, hi: float, target: float,
                counter: _Counter | None = None) -> float:
    """Root of count(ε) = target in (lo, hi): bisection (shrinking the counter), then brentq."""
    for _ in range(12):
        mid = 0.5 * (lo + hi)
        if count(mid) < target:
            lo = mid
        else:
            hi = mid
        if counter is not None:
            counter.restrict(lo, hi)
    if hi - lo <= FERMI_TOLERANCE_EV:
        return 0.5 * (lo + hi)
    return float(scipy.optimize.brentq(lambda x: count(x) - target, lo, hi,
                                       xtol=FERMI_TOLERANCE_EV, rtol=4 * np.finfo(float).eps))


def fermi_level_from_count(mesh: KMesh, energies_eV: np.ndarray, n_electrons: float,
                           method: str = "tetrahedron",
                           smearing_eV: float = DEFAULT_SMEARING_EV) -> float:
    """Fermi level: the energy below which the mesh holds ``n_electrons`` per cell (2 per band).

    Solves N(E_F) = n_electrons with N from :func:`tetrahedron_count` (``method="tetrahedron"``)
    or the Gaussian count 2 Σ_k w_k Σ_n ½ erfc((E_nk − E_F)/σ) (``method="gaussian"``), by
    bisection then Brent's method, to :data:`FERMI_TOLERANCE_EV`.

    Insulator: when n_electrons = 2m is even and band m lies wholly below band m + 1 on the mesh,
    the tetrahedron count equals n_electrons on the whole interval [max E_m, min E_m+1] (the gap
    seen by the mesh). Both methods then return the middle of that interval, the usual choice;
    a Gaussian count has no flat region but its root would wander with σ.

    Parameters
    ----------
    mesh : KMesh
    energies_eV : numpy.ndarray
        (n_irr, n_bands) band energies on ``mesh.k_frac``, sorted at each k.
    n_electrons : float
        Electrons per primitive cell.
    method : str
        "tetrahedron" or "gaussian".
    smearing_eV : float
        Gaussian width σ (``method="gaussian"`` only).

    Returns
    -------
    float
        E_F in eV (absolute energies).

    Raises
    ------
    InputError
        Key ``bands`` when the bands given cannot hold the electrons with margin: the level would
        lie above the bottom of the highest band given (where bands not computed begin to count),
        or, for an insulator, no band above the gap was given.
    """
    e = _check_energies(mesh, energies_eV)
    if method not in ("tetrahedron", "gaussian"):
        raise InputError(f"unknown method '{method}'; expected 'tetrahedron' or 'gaussian'",
                         key="method")
    if not np.isfinite(n_electrons) or n_electrons <= 0:
        raise InputError(f"{n_electrons!r} electrons; expected a positive number",
                         key="electrons.valence")
    sigma = _check_smearing(smearing_eV) if method == "gaussian" else 0.0
    n_bands = e.shape[1]
    half = n_electrons / SPIN_DEGENERACY
    if n_bands <= half:
        raise InputError(f"{n_bands} bands hold at most {SPIN_DEGENERACY * n_bands} electrons, "
                         f"{n_electrons:g} asked for; expected at least {int(np.floor(half)) + 1} "
                         "bands", key="bands")
    m = int(round(half))
    if abs(half - m) < 1e-12 and e[:, m - 1].max() < e[:, m].min():
        return 0.5 * float(e[:, m - 1].max() + e[:, m].min())
    lo, top = float(e.min()) - 1.0, float(e[:, -1].min())
    hi = top - GAUSSIAN_MARGIN_WIDTHS * sigma
    if method == "gaussian":
        count = lambda x: _gaussian_count(e, mesh.weights, x, sigma)
        counter = None
    else:
        # bands wholly below the bracket count fully; only the rest enter the simplices
        corners, n_below, w = _band_simplices(mesh, e, lo, hi)
        stacked = (np.concatenate(corners) if corners else
                   np.empty((0, mesh.dimension + 1)))
        counter = _Counter(stacked, w, SPIN_DEGENERACY * n_below)
        count = counter
    if hi <= lo or count(hi) <= n_electrons:
        limit = ("the bottom of the highest band given" if method == "tetrahedron" else
                 f"{GAUSSIAN_MARGIN_WIDTHS:g} σ below the bottom of the highest band given")
        raise InputError(f"the {n_bands} bands given cannot hold {n_electrons:g} electrons with "
                         f"margin: the Fermi level lies above {limit} ({hi:.4f} eV); expected "
                         "more bands", key="bands")
    return _find_level(count, lo, hi, n_electrons, counter)
