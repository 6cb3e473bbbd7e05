"""Linear tetrahedra on a uniform k-mesh: the simplices of the grid and their closed-form integrals.

P. E. Blöchl, O. Jepsen and O. K. Andersen, Phys. Rev. B 49, 16223 (1994), Sec. II–III and
Appendix A: every sub-cube of the periodic grid is cut into six tetrahedra sharing the cube's
shortest main diagonal (in Cartesian space); inside a tetrahedron each band is interpolated
linearly between its four corners, which makes the number of states below ε a piecewise cubic in
ε and the density a piecewise quadratic. In 2D the squares are cut into two triangles along the
shorter diagonal, in 1D the grid steps are segments. :mod:`bandpert.physics.dos` sums these over
bands and spins.
"""

from __future__ import annotations

import itertools

import numpy as np

from ..crystal.kmesh import KMesh

#: Largest number of (simplex, energy) pairs evaluated at once (bounds the working memory).
MAX_PAIRS = 2**21


def _corner_offsets(d: int) -> np.ndarray:
    """The 2^d corners of a grid cell as 0/1 offsets; corner c has bits c_j = (c >> j) & 1."""
    return np.array([[(c >> j) & 1 for j in range(d)] for c in range(2**d)], dtype=np.int64)


def _grid_paths(mesh: KMesh) -> tuple[np.ndarray, np.ndarray]:
    """Corner offsets of a cell (2^d, d) and the d! corner paths of its simplices (d!, d + 1).

    The paths run o → o⊕e_σ0 → o⊕e_σ0⊕e_σ1 → … → o⊕(1, …, 1) over the permutations σ of the
    axes, where o → o⊕(1, …, 1) is the shortest main diagonal in Cartesian space (Blöchl,
    Jepsen & Andersen 1994, Sec. III).
    """
    shape = np.array(mesh.shape)
    d = len(shape)
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
    return offsets, np.array(paths)


def _cell_corners(shape: tuple[int, ...], offsets: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Full-grid (C order) indices of the 2^d corners of the cells with the given C-order origins.

    Returns
    -------
    numpy.ndarray
        (n_cells, 2^d) indices, the grid periodic.
    """
    n = np.array(shape)
    base = np.stack(np.unravel_index(cells, shape), axis=-1)  # (n_cells, d)
    idx = np.mod(base[:, None, :] + offsets[None, :, :], n)  # (n_cells, 2^d, d)
    flat = np.zeros(idx.shape[:2], dtype=np.int64)
    for j in range(len(shape)):
        flat = flat * n[j] + idx[..., j]
    return flat


def simplex_corners(mesh: KMesh) -> np.ndarray:
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
    offsets, paths = _grid_paths(mesh)
    flat = _cell_corners(mesh.shape, offsets, np.arange(mesh.n_full))
    return flat[:, paths].reshape(-1, len(mesh.shape) + 1)


#: Grid cells handled at once while the simplices are grouped (bounds the working memory).
CELL_BLOCK = 2**17

#: The last grouping computed, keyed by the mesh it belongs to (the DOS, the Fermi level and the
#: Drude weight of one run all need it).
_LAST_GROUPING: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}


def _unique_rows(rows: np.ndarray, counts: np.ndarray, n_values: int
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Distinct sorted rows of small non-negative integers and their summed counts."""
    m = rows.shape[1]
    if float(n_values) ** m < 2.0**62:
        key = np.zeros(len(rows), dtype=np.int64)
        for j in range(m):
            key = key * n_values + rows[:, j]
        _, first, inverse = np.unique(key, return_index=True, return_inverse=True)
    else:
        _, first, inverse = np.unique(rows, axis=0, return_index=True, return_inverse=True)
    return rows[first], np.bincount(inverse.ravel(), weights=counts, minlength=len(first))


def irreducible_simplices(mesh: KMesh) -> tuple[np.ndarray, np.ndarray]:
    """The simplices of the grid grouped by the irreducible points at their corners.

    Energies live on the irreducible points (``mesh.full_to_irreducible``), so two simplices
    whose corners map to the same set of irreducible points have the same corner energies in
    every band (in some order) and add the same amount to any quantity that depends on the
    sorted corner energies (the count, the density) or on a symmetric function of the corners
    (a corner mean of a point-group invariant). Symmetry-equivalent simplices fall together
    this way: silicon on a 100³ grid has 6·10⁶ tetrahedra in 127 473 groups. Exact: nothing is
    approximated, only equal terms added once with their multiplicity.

    Returns
    -------
    corners : numpy.ndarray
        (n_groups, d + 1) irreducible-point indices of each group's corners, ascending.
    weights : numpy.ndarray
        (n_groups,) simplices in each group divided by the number of simplices (Σ = 1).
    """
    key = (mesh.shape, mesh.reciprocal_invA.tobytes(), mesh.full_to_irreducible.tobytes(),
           len(mesh.k_frac))
    if key in _LAST_GROUPING:
        return _LAST_GROUPING[key]
    offsets, paths = _grid_paths(mesh)
    d = len(mesh.shape)
    n_irr = len(mesh.k_frac)
    n_simplices = mesh.n_full * len(paths)
    if n_irr == mesh.n_full and np.array_equal(mesh.full_to_irreducible, np.arange(n_irr)):
        return simplex_corners(mesh), np.full(n_simplices, 1.0 / n_simplices)
    rows, counts = [], []
    for start in range(0, mesh.n_full, CELL_BLOCK):
        cells = np.arange(start, min(mesh.n_full, start + CELL_BLOCK))
        corners = mesh.full_to_irreducible[_cell_corners(mesh.shape, offsets, cells)]
        block = np.sort(corners[:, paths].reshape(-1, d + 1), axis=1)
        r, c = _unique_rows(block, np.ones(len(block)), n_irr)
        rows.append(r)
        counts.append(c)
    corners, count = _unique_rows(np.concatenate(rows), np.concatenate(counts), n_irr)
    result = (corners, count / n_simplices)
    _LAST_GROUPING.clear()
    _LAST_GROUPING[key] = result
    return result


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


def accumulate(corners_eV: np.ndarray, grid_eV: np.ndarray, weights: np.ndarray | None = None
               ) -> tuple[np.ndarray, np.ndarray]:
    """Σ over simplices of the (weighted) occupied fraction and the density at sorted energies.

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
    weights : numpy.ndarray, optional
        (M,) weight of each simplex (e.g. the multiplicities of
        :func:`irreducible_simplices`); 1 each by default.

    Returns
    -------
    fraction_sum, density_sum : numpy.ndarray
        (n_E,) each, weighted sums over the M simplices.
    """
    corners_eV = _snap_degenerate(corners_eV)
    n_e = len(grid_eV)
    start = np.searchsorted(grid_eV, corners_eV[:, 0], side="left")
    stop = np.searchsorted(grid_eV, corners_eV[:, -1], side="left")
    fraction = np.cumsum(np.bincount(stop, weights=weights, minlength=n_e + 1))[:n_e]
    fraction = fraction.astype(float)
    density = np.zeros(n_e)
    length = stop - start
    busy = np.flatnonzero(length > 0)
    if busy.size == 0:
        return fraction, density
    corners = corners_eV[busy]
    start, length = start[busy], length[busy]
    wb = None if weights is None else np.asarray(weights, dtype=float)[busy]
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
        if wb is not None:
            f, dens = f * wb[owner], dens * wb[owner]
        fraction += np.bincount(g, weights=f, minlength=n_e)
        density += np.bincount(g, weights=dens, minlength=n_e)
    return fraction, density


def _corner_weights(e: np.ndarray, energy_eV: float) -> np.ndarray:
    """Blöchl's integration weights of the four sorted corners of tetrahedra of unit volume.

    w_i such that ∫_T θ(ε − E(k)) X(k) dk / V_T = Σ_i w_i X_i for any X linear across the
    tetrahedron (P. E. Blöchl, O. Jepsen and O. K. Andersen, Phys. Rev. B 49, 16223 (1994),
    Appendix B, without the curvature correction). Σ_i w_i is the fraction of
    :func:`simplex_occupation`.

    Parameters
    ----------
    e : numpy.ndarray
        (M, 4) corner energies, sorted along the last axis.
    energy_eV : float

    Returns
    -------
    numpy.ndarray
        (M, 4) weights of the sorted corners.
    """
    x = float(energy_eV)
    e = _snap_degenerate(e)
    e1, e2, e3, e4 = e[:, 0], e[:, 1], e[:, 2], e[:, 3]
    safe = lambda v: np.where(v > 0, v, 1.0)  # an empty interval's formulas are never used
    e21, e31, e41 = safe(e2 - e1), safe(e3 - e1), safe(e4 - e1)
    e32, e42, e43 = safe(e3 - e2), safe(e4 - e2), safe(e4 - e3)
    w = np.zeros_like(e)
    w[x >= e4] = 0.25
    first = (x > e1) & (x < e2)
    if first.any():
        d = x - e1
        c = d**3 / (e21 * e31 * e41) / 4.0
        w[first, 0] = (c * (4.0 - d * (1 / e21 + 1 / e31 + 1 / e41)))[first]
        w[first, 1] = (c * d / e21)[first]
        w[first, 2] = (c * d / e31)[first]
        w[first, 3] = (c * d / e41)[first]
    middle = (x >= e2) & (x < e3) & (x > e1)
    if middle.any():
        d1, d2, u3, u4 = x - e1, x - e2, e3 - x, e4 - x
        c1 = d1**2 / (e41 * e31)
        c2 = d1 * d2 * u3 / (e41 * e32 * e31)
        c3 = d2**2 * u4 / (e42 * e32 * e41)
        w[middle, 0] = ((c1 + (c1 + c2) * u3 / e31 + (c1 + c2 + c3) * u4 / e41) / 4.0)[middle]
        w[middle, 1] = ((c1 + c2 + c3 + (c2 + c3) * u3 / e32 + c3 * u4 / e42) / 4.0)[middle]
        w[middle, 2] = (((c1 + c2) * d1 / e31 + (c2 + c3) * d2 / e32) / 4.0)[middle]
        w[middle, 3] = (((c1 + c2 + c3) * d1 / e41 + c3 * d2 / e42) / 4.0)[middle]
    last = (x >= e3) & (x < e4) & (x > e1)
    if last.any():
        u = e4 - x
        c = u**3 / (e41 * e42 * e43) / 4.0
        w[last, 0] = (0.25 - c * u / e41)[last]
        w[last, 1] = (0.25 - c * u / e42)[last]
        w[last, 2] = (0.25 - c * u / e43)[last]
        w[last, 3] = (0.25 - c * (4.0 - u * (1 / e41 + 1 / e42 + 1 / e43)))[last]
    return w


def occupations(mesh: KMesh, energies_eV: np.ndarray, fermi_level_eV: float) -> np.ndarray:
    """Occupation f_n(k) ∈ [0, 1] of each level at the irreducible points, by linear tetrahedra.

    f_n(k) w_k = Σ_T Σ_corners at k of Blöchl's integration weight (:func:`_corner_weights`):
    Σ_k w_k f_n(k) X_n(k) is then the linear-tetrahedron integral ∫ θ(E_F − E_n) X_n dk/V_zone
    for any X linear between the grid points, and Σ_k w_k Σ_n f_n(k) the tetrahedron count
    (3D meshes).

    Parameters
    ----------
    mesh : KMesh
        A 3D mesh.
    energies_eV : numpy.ndarray
        (n_irr, n_bands) on the irreducible points.
    fermi_level_eV : float

    Returns
    -------
    numpy.ndarray
        (n_irr, n_bands) occupations (one spin).
    """
    e = np.asarray(energies_eV, dtype=float)
    if mesh.dimension != 3:
        raise ValueError("tetrahedron occupations are built for 3D meshes")
    index, weights = irreducible_simplices(mesh)
    occ = np.zeros(e.shape)
    for n in range(e.shape[1]):
        band = e[:, n]
        if band.max() <= fermi_level_eV:
            occ[:, n] = 1.0
            continue
        if band.min() >= fermi_level_eV:
            continue
        c = band[index]
        order = np.argsort(c, axis=1, kind="stable")
        w = _corner_weights(np.take_along_axis(c, order, axis=1), fermi_level_eV)
        who = np.take_along_axis(index, order, axis=1)
        occ[:, n] = np.bincount(who.ravel(), weights=(w * weights[:, None]).ravel(),
                                minlength=len(e)) / mesh.weights
    return occ
