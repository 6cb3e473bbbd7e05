"""Free-electron degeneracies: equal-energy groups of plane waves, and band crossings on a path.

The empty-lattice levels E_G(k) = ħ²|k+G|²/2m0 (Ashcroft & Mermin, *Solid State Physics*, 1976,
ch. 9) grouped by energy at one k (:func:`free_electron_groups`), and located where two of them
cross between the labelled points of the path (:func:`path_crossings`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..crystal.lattice import standard_path
from ..input.material import Material
from ..planewave.model import PlaneWaveModel

__all__ = ["DEGENERACY_TOLERANCE_EV", "PathCrossing", "free_electron_groups", "path_crossings"]

#: Free-electron levels closer than this (eV) are one degenerate group.
DEGENERACY_TOLERANCE_EV: float = 1e-6


def free_electron_groups(kinetic_eV: np.ndarray, n_levels: int,
                         tol_eV: float = DEGENERACY_TOLERANCE_EV
                         ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Group the plane waves of one k-point by equal free-electron energy.

    The free-electron (empty-lattice) levels are E_G(k) = ħ²|k+G|²/2m0 (Ashcroft & Mermin,
    *Solid State Physics*, 1976, ch. 9, the empty-lattice levels). Sorted ascending,
    consecutive levels closer than ``tol_eV`` belong to one group; the groups whose lowest
    sorted position is below ``n_levels`` are returned.

    Parameters
    ----------
    kinetic_eV : numpy.ndarray
        (n,) free-electron energies of the basis at k (``PlaneWaveModel.kinetic_eV(k)[0]``).
    n_levels : int
        Examine the groups starting below this sorted position (e.g. the number of bands).
    tol_eV : float
        Degeneracy tolerance.

    Returns
    -------
    order : numpy.ndarray
        (n,) basis indices sorted by energy (stable).
    first_indices : numpy.ndarray
        (n_groups,) sorted position of each group's first member.
    sizes : numpy.ndarray
        (n_groups,) number of plane waves in each group (its degeneracy).
    """
    e = np.asarray(kinetic_eV, dtype=float)
    order = np.argsort(e, kind="stable")
    es = e[order]
    starts = np.concatenate([[0], np.flatnonzero(np.diff(es) > tol_eV) + 1])
    sizes = np.diff(np.concatenate([starts, [e.size]]))
    keep = starts < n_levels
    return order, starts[keep], sizes[keep]


def _segments(material: Material, b: np.ndarray) -> list[tuple[str, str, np.ndarray, np.ndarray,
                                                                float, float]]:
    """(start, end, start_frac, end_frac, start_distance, length) of every path segment.

    Distances accumulate as in :func:`bandpert.lattice.sample_path` (no advance at a jump).
    """
    points, legs = standard_path(material)
    out = []
    x0 = 0.0
    for leg in legs:
        for s, e in zip(leg[:-1], leg[1:], strict=True):
            k0, k1 = np.array(points[s], dtype=float), np.array(points[e], dtype=float)
            length = float(np.linalg.norm((k1 - k0) @ b))
            out.append((s, e, k0, k1, x0, length))
            x0 += length
    return out


@dataclass(frozen=True)
class PathCrossing:
    """A crossing of free-electron bands between two labelled points of the path.

    Attributes
    ----------
    start, end : str
        Labels at the ends of the segment.
    fraction : float
        Position on the segment, 0 at ``start`` and 1 at ``end``.
    k_frac : numpy.ndarray
        (d,) the crossing point in fractions of the reciprocal primitive vectors.
    path_distance_invA : float
        Its position along the path (Å⁻¹).
    miller : numpy.ndarray
        (m, d) the G (reciprocal primitive basis) whose bands cross there.
    """

    start: str
    end: str
    fraction: float
    k_frac: np.ndarray
    path_distance_invA: float
    miller: np.ndarray


def path_crossings(model: PlaneWaveModel, material: Material, n_levels: int,
                   tol_eV: float = DEGENERACY_TOLERANCE_EV) -> list[PathCrossing]:
    """Crossings of free-electron bands between the labelled points of the path.

    Along a straight segment k(t) = k0 + t (k1 − k0), the difference of two free-electron
    energies, ħ²/2m0 (|k+G|² − |k+G'|²) = ħ²/2m0 (2 k·(G − G') + |G|² − |G'|²), is linear in t,
    so a sign change between the two ends locates the crossing exactly at
    t* = d0 / (d0 − d1) (a bisection would converge to the same point). Only bands that can be
    among the lowest ``n_levels`` on the segment are paired (a G whose minimum on the segment
    lies above the ``n_levels``-th smallest of the end-point maxima cannot be: each E_G(t) is
    convex in t), and a crossing is kept when the lower crossing band sits below sorted
    position ``n_levels`` there. Bands degenerate along the whole segment do not cross, and
    crossings at the labelled ends belong to those points. Pairs crossing at the same point
    are merged.

    Parameters
    ----------
    model : PlaneWaveModel
    material : Material
        Supplies the path (standard or custom).
    n_levels : int
        Number of lowest free-electron bands considered.
    tol_eV : float
        Energies closer than this are equal.

    Returns
    -------
    list of PathCrossing
        In path order.
    """
    b = model.reciprocal_invA
    g = model.basis.g_cart_invA
    n = g.shape[0]
    found = []
    for s, e, k0, k1, x0, length in _segments(material, b):
        c0, c1 = k0 @ b, k1 @ b
        dk = c1 - c0
        dk2 = float(dk @ dk)
        if dk2 == 0.0:
            continue
        e_ends = model.kinetic_eV(np.stack([c0, c1]))  # (2, n)
        # minimum of the convex |c0 + t dk + G|² over t in [0, 1]
        t_min = np.clip(-((c0 + g) @ dk) / dk2, 0.0, 1.0)
        kg = c0 + t_min[:, None] * dk + g
        e_min = model.kinetic_constant_eV_A2 * np.einsum("ij,ij->i", kg, kg)
        bound = np.sort(e_ends.max(axis=0))[min(n_levels, n) - 1]
        cand = np.flatnonzero(e_min <= bound + tol_eV)
        d0 = e_ends[0, cand][:, None] - e_ends[0, cand][None, :]
        d1 = e_ends[1, cand][:, None] - e_ends[1, cand][None, :]
        cross = ((d0 > tol_eV) & (d1 < -tol_eV)) | ((d0 < -tol_eV) & (d1 > tol_eV))
        i, j = np.nonzero(np.triu(cross, 1))
        if not i.size:
            continue
        t = d0[i, j] / (d0[i, j] - d1[i, j])
        srt = np.argsort(t)
        cluster = np.empty(t.size, dtype=np.intp)
        cluster[srt] = np.cumsum(np.concatenate([[0], np.diff(t[srt]) > 1e-9]))
        for c in range(int(cluster.max()) + 1):
            here = cluster == c
            tk = float(t[here][0])  # exact for this pair; the others agree to rounding
            bands = np.unique(np.concatenate([cand[i[here]], cand[j[here]]]))
            k_frac = k0 + tk * (k1 - k0)
            order = np.argsort(model.kinetic_eV(k_frac @ b)[0], kind="stable")
            position = np.empty(n, dtype=np.intp)
            position[order] = np.arange(n)
            if position[bands].min() < n_levels:
                found.append(PathCrossing(s, e, float(tk), k_frac, x0 + float(tk) * length,
                                          model.basis.miller[bands].copy()))
    return found

