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
the numbers are those of the linear interpolation itself. The simplices and their closed-form
integrals live in :mod:`bandpert.physics.tetrahedra`.

Everything is per primitive cell and counts both spins: a band holds two electrons.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.optimize
import scipy.special

from ..crystal.kmesh import KMesh
from ..errors import InputError
from .tetrahedra import MAX_PAIRS, accumulate, irreducible_simplices, simplex_occupation

#: Electrons per band and k-point (spin degeneracy of the spinless models).
SPIN_DEGENERACY = 2

#: The one default Gaussian width σ (eV), for the Fermi level and the DOS of every command.
DEFAULT_SMEARING_EV = 0.05

#: Fermi-level methods: the linear tetrahedron method (the default) or Gaussian smearing.
FERMI_METHODS = ("tetrahedron", "gaussian")

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
                    hi_eV: float = np.inf) -> tuple[list[np.ndarray], int, np.ndarray]:
    """Sorted corner energies of the simplices, band by band, for the bands that matter.

    The simplices are grouped by the irreducible points at their corners
    (:func:`~bandpert.physics.tetrahedra.irreducible_simplices`): equal corner energies are
    integrated once and weighted by their multiplicity. Bands wholly below ``lo_eV`` are only
    counted (each adds its full weight at every energy from ``lo_eV`` on); bands wholly at or
    above ``hi_eV`` are skipped.

    Returns
    -------
    corners : list of numpy.ndarray
        One (n_groups, d + 1) array of sorted corner energies per band kept.
    n_below : int
        Bands wholly below ``lo_eV``.
    weights : numpy.ndarray
        (n_groups,) share of the zone of each group of simplices (Σ = 1).
    """
    index, weights = irreducible_simplices(mesh)
    lowest, highest = energies_eV.min(axis=0), energies_eV.max(axis=0)
    below = highest < lo_eV
    kept = [np.sort(energies_eV[:, n][index], axis=1) for n in range(energies_eV.shape[1])
            if not below[n] and lowest[n] < hi_eV]
    return kept, int(np.count_nonzero(below)), weights


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
    total = np.full(flat.size, float(n_below))
    for band in simplices:  # one band at a time: memory ∝ one band's simplices
        total += accumulate(band, x_sorted, w)[0]
    out = np.empty(flat.size)
    out[order] = SPIN_DEGENERACY * total
    return float(out[0]) if x.ndim == 0 else out.reshape(x.shape)


def tetrahedron_dos(mesh: KMesh, energies_eV: np.ndarray,
                    energy_grid_eV: np.ndarray) -> DensityOfStates:
    """Density of states and integrated count by the linear tetrahedron method.

    The energies on the irreducible points are unfolded onto the full grid
    (``mesh.full_to_irreducible``); each grid cell is cut into simplices sharing its shortest
    Cartesian diagonal (:func:`simplex_corners`: 6 tetrahedra in 3D, 2 triangles in 2D, a
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
    count = np.full(grid.size, float(n_below))
    dos = np.zeros(grid.size)
    for band in simplices:
        f, dens = accumulate(band, grid, w)
        count += f
        dos += dens
    return DensityOfStates(grid, SPIN_DEGENERACY * dos, SPIN_DEGENERACY * count,
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

    def __init__(self, corners_eV: np.ndarray, weights: np.ndarray, base: float = 0.0):
        self.corners = corners_eV
        self.weights = weights
        self.base = base

    def __call__(self, energy_eV: float) -> float:
        c, w = self.corners, self.weights
        below = float(np.sum(w[c[:, -1] <= energy_eV]))
        inside = (c[:, 0] < energy_eV) & (energy_eV < c[:, -1])
        f, _ = simplex_occupation(c[inside], energy_eV)
        return self.base + SPIN_DEGENERACY * (below + float(f @ w[inside]))

    def restrict(self, lo: float, hi: float) -> None:
        """Keep the simplices overlapping (lo, hi); those below lo go into the base count."""
        c = self.corners
        done = c[:, -1] <= lo
        self.base += SPIN_DEGENERACY * float(np.sum(self.weights[done]))
        keep = ~done & (c[:, 0] < hi)
        self.corners, self.weights = c[keep], self.weights[keep]


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
        counter = _Counter(stacked, np.tile(w, len(corners)), SPIN_DEGENERACY * n_below)
        count = counter
    if hi <= lo or count(hi) <= n_electrons:
        limit = ("the bottom of the highest band given" if method == "tetrahedron" else
                 f"{GAUSSIAN_MARGIN_WIDTHS:g} σ below the bottom of the highest band given")
        raise InputError(f"the {n_bands} bands given cannot hold {n_electrons:g} electrons with "
                         f"margin: the Fermi level lies above {limit} ({hi:.4f} eV); expected "
                         "more bands", key="bands")
    return _find_level(count, lo, hi, n_electrons, counter)
