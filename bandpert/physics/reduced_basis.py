"""Reduced-basis interpolation of plane-wave bands: exact states on a coarse mesh, a small basis,
and the small matrix diagonalised at every point of a dense mesh.

The method is the optimal-basis k·p of E. L. Shirley, Phys. Rev. B 54, 16464 (1996) (after the
full-zone k·p of M. Cardona and F. H. Pollak, Phys. Rev. 142, 530 (1966)):

1. One fixed set of plane waves for every k: the union of the bases centred on the points of a
   Γ-centred coarse mesh folded into the first zone, every image of a zone-boundary point
   included (:func:`fixed_superset_model`). Each coarse point's own symmetric basis
   ħ²|k+G|²/2m0 ≤ cutoff (:class:`~bandpert.planewave.model.KCentredModel`) is a subset, so the
   superset is at least as converged there.
2. The lowest ``n_bands + buffer_bands`` eigenvectors at every coarse point are stacked as the
   columns of U; the left singular vectors of U with singular value σ ≥ ``basis_tolerance``·σ_max
   are kept (from the eigenvalues σ² of U U†). The buffer bands above the window keep the top
   band of the window as accurate as the others.
3. H(k) = H0 + (ħ²/m0) k·Q + (ħ²/2m0)|k|² is exact on the fixed plane waves for the local spinless
   model (:mod:`bandpert.planewave.k_polynomial`), so B†H0B and B†QB are built once and the small
   matrix at any k is a sum of four matrices, diagonalised in batches of k-points.
4. Error control (:mod:`bandpert.physics.reduced_basis_check`): a stated share of the dense
   points is also diagonalised exactly and the run refines or fails loudly.

Spin–orbit coupling: the fixed set holds spinor plane waves, the coarse states are spinors and the
spin–orbit term, not polynomial in k (its radial factors depend on |k + G|), is projected onto
each reduced basis at each k, B†H_so(k)B (:class:`~bandpert.planewave.k_polynomial.
ProjectedSpinOrbit`): O(n_f² n_r) per k for n_f plane waves and n_r reduced states, against
O((2n_f)³) for the exact spinor matrix. Nonlocal wells are projected at each k the same way
(:class:`~bandpert.planewave.k_polynomial.ProjectedNonlocal`).
"""

from __future__ import annotations

import itertools
import os
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from ..crystal.kmesh import full_grid_frac
from ..errors import InputError
from ..input.material import Material
from ..planewave.basis import MAX_BASIS, PlaneWaveBasis, estimated_basis_size
from ..planewave.k_polynomial import KPolynomial, k_polynomial
from ..planewave.model import PlaneWaveModel, build_k_centred_model, build_model
from ..planewave.solver import single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2

#: Default points per axis of the coarse mesh whose exact states span the basis.
DEFAULT_COARSE_MESH = 4

#: Default relative singular-value cut: vectors with σ < tolerance·σ_max are dropped.
DEFAULT_BASIS_TOLERANCE = 3e-3

#: Default bands kept above the window at every coarse point.
DEFAULT_BUFFER_BANDS = 4

#: Default largest difference allowed between interpolated and exact bands at the check points.
DEFAULT_TOLERANCE_EV = 0.005

#: Default share of the dense points also diagonalised exactly, and the least number of them.
DEFAULT_CHECK_SHARE = 0.01
MIN_CHECK_POINTS = 16

#: Refinements tried when the check fails: coarse mesh + 2 and basis tolerance / 3 each time.
MAX_REFINEMENTS = 2

#: Largest coarse mesh per axis (the coarse work grows as its cube).
MAX_COARSE_MESH = 12

#: Largest neighbourhood of a local basis, in coarse-mesh spacings.
MAX_LOCAL_RADIUS = 3.0

#: Default neighbourhood of the local bases (coarse-mesh spacings), when they are asked for.
DEFAULT_LOCAL_RADIUS = 1.5

#: Eigenpairs computed beyond the kept ones at each coarse point, to find where a degenerate
#: group at the window's edge ends, and the spacing (eV) below which levels are one group.
GROUP_MARGIN = 8
DEGENERATE_STATES_EV = 1e-6

#: Largest stack of coarse eigenvectors held at once (bytes).
MAX_STACK_BYTES = 2 * 2**30


#: Threads that diagonalise blocks of k-points at once (LAPACK releases the GIL; each thread
#: runs BLAS on one thread). The machine's cores, at most 2.
THREADS = max(1, min(2, os.cpu_count() or 1))


def threaded_map(fn: Callable, items: Iterable, threads: int = THREADS) -> Iterator:
    """fn over items on ``threads`` threads, results in order, at most 2·threads in flight.

    For the per-block diagonalisations of dense meshes: each block is independent, the results
    are consumed in order (so sums over them do not depend on the threads), and the memory
    stays bounded by the blocks in flight.
    """
    items = iter(items)
    if threads <= 1:
        yield from map(fn, items)
        return
    with ThreadPoolExecutor(threads) as pool:
        pending = [pool.submit(fn, x) for x in itertools.islice(items, 2 * threads)]
        while pending:
            done = pending.pop(0)
            nxt = next(items, None)
            if nxt is not None:
                pending.append(pool.submit(fn, nxt))
            yield done.result()


@dataclass(frozen=True)
class ReducedBasisSettings:
    """How the reduced basis is built and checked.

    Attributes
    ----------
    coarse_mesh : int
        Points per axis of the Γ-centred coarse mesh (≥ 2).
    basis_tolerance : float
        Relative singular-value cut, in (0, 1).
    buffer_bands : int
        Bands kept above the window at each coarse point (≥ 0).
    tolerance_eV : float
        Largest difference from the exact bands accepted at the check points (> 0).
    check_share : float
        Share of the dense points diagonalised exactly as well, in (0, 1].
    seed : int
        Seed of the choice of check points (a run is reproducible).
    local_radius : float
        0 for one basis over the whole zone (Shirley 1996); > 0 for one basis per coarse point
        built from the coarse points within this many coarse-mesh spacings (at least 1), used
        for the dense points nearest that coarse point: smaller matrices, faster.
    """

    coarse_mesh: int = DEFAULT_COARSE_MESH
    basis_tolerance: float = DEFAULT_BASIS_TOLERANCE
    buffer_bands: int = DEFAULT_BUFFER_BANDS
    tolerance_eV: float = DEFAULT_TOLERANCE_EV
    check_share: float = DEFAULT_CHECK_SHARE
    seed: int = 0
    local_radius: float = 1.5

    def checked(self) -> ReducedBasisSettings:
        """These settings, or an :class:`InputError` naming the first one out of range."""
        c = self.coarse_mesh
        if isinstance(c, bool) or not isinstance(c, int | np.integer) or not (
                2 <= c <= MAX_COARSE_MESH):
            raise InputError(f"got {c!r}; expected a whole number of points per axis from 2 to "
                             f"{MAX_COARSE_MESH}", key="coarse_mesh")
        t = self.basis_tolerance
        if not (np.isfinite(t) and 0 < t < 1):
            raise InputError(f"got {t!r}; expected a relative singular-value cut between 0 and 1 "
                             "(e.g. 3e-3)", key="basis_tolerance")
        b = self.buffer_bands
        if isinstance(b, bool) or not isinstance(b, int | np.integer) or b < 0:
            raise InputError(f"got {b!r}; expected a whole number ≥ 0", key="buffer_bands")
        e = self.tolerance_eV
        if not (np.isfinite(e) and 0 < e <= 1.0):
            raise InputError(f"got {e!r} eV; expected a tolerance above 0 and at most 1 eV",
                             key="interpolation_tolerance_eV")
        s = self.check_share
        if not (np.isfinite(s) and 0 < s <= 1):
            raise InputError(f"got {s!r}; expected a share of the points in (0, 1]",
                             key="check_share")
        r = self.local_radius
        if not (np.isfinite(r) and (r == 0 or 1 <= r <= MAX_LOCAL_RADIUS)):
            raise InputError(f"got {r!r}; expected 0 (one basis for the zone) or a radius from 1 "
                             f"to {MAX_LOCAL_RADIUS:g} coarse-mesh spacings", key="local_radius")
        return self


def zone_images(k_frac: np.ndarray, reciprocal_invA: np.ndarray) -> np.ndarray:
    """Every image k + m (m ∈ {−1, 0, 1}^d) of each point as short as its shortest image.

    A zone-boundary point has several images in the closed first zone (X has two, L two, W
    three in fcc); in one fixed set of plane waves their states are different vectors (shifted
    coefficients), and dense points near each image need them.

    Returns
    -------
    numpy.ndarray
        (n_images, d) Cartesian points (Å⁻¹).
    """
    k = np.asarray(k_frac, dtype=float)
    d = k.shape[1]
    k = k - np.floor(k + 0.5)
    shifts = np.array(list(itertools.product((0, -1, 1), repeat=d)), dtype=float)
    images = (k[:, None, :] + shifts[None, :, :]) @ reciprocal_invA
    length = np.linalg.norm(images, axis=-1)
    shortest = length.min(axis=1, keepdims=True)
    return images[length <= shortest + 1e-9 * (1.0 + shortest)]


def fixed_superset_model(material: Material, cutoff_eV: float, k_cart_invA: np.ndarray
                         ) -> PlaneWaveModel:
    """One fixed set of plane waves holding the k-centred basis of every point given.

    {G : ħ²|k+G|²/2m0 ≤ cutoff for some k of ``k_cart_invA``}, with V(G − G') on it (and the
    spin–orbit term's structure factors when the material has one). Its size is estimated
    before anything is built (the sphere |G| ≤ G_max + max|k|) and refused above
    :data:`~bandpert.planewave.basis.MAX_BASIS`.

    Parameters
    ----------
    material : Material
    cutoff_eV : float
    k_cart_invA : numpy.ndarray
        (n_k, d) points whose bases must be included.

    Returns
    -------
    PlaneWaveModel
    """
    k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
    reach = float(np.max(np.linalg.norm(k, axis=1), initial=0.0))
    wide = HBAR2_OVER_2M0_EV_A2 * (np.sqrt(cutoff_eV / HBAR2_OVER_2M0_EV_A2) + reach) ** 2
    gamma = build_model(material, cutoff_eV, spin_orbit=True)
    estimate = estimated_basis_size(gamma.reciprocal_invA, wide)
    if estimate > 1.5 * MAX_BASIS:  # the sphere overestimates the union of the bases
        raise InputError(f"the reduced basis needs the plane waves of the bases centred on every "
                         f"point of the zone, about {estimate:.0f} at a cutoff of "
                         f"{cutoff_eV:.4g} eV (the limit is {MAX_BASIS}); expected a smaller "
                         "cutoff", material.file, "cutoff_eV")
    full = build_model(material, wide, spin_orbit=True)
    g = full.basis.g_cart_invA
    lowest = np.full(len(g), np.inf)
    for start in range(0, len(k), 64):
        kg = k[start:start + 64, None, :] + g[None, :, :]
        lowest = np.minimum(lowest, np.einsum("kgi,kgi->kg", kg, kg).min(axis=0))
    keep = np.flatnonzero(HBAR2_OVER_2M0_EV_A2 * lowest <= cutoff_eV * (1 + 1e-12))
    if len(keep) > MAX_BASIS:
        raise InputError(f"the reduced basis needs {len(keep)} plane waves at a cutoff of "
                         f"{cutoff_eV:.4g} eV (the limit is {MAX_BASIS}); expected a smaller "
                         "cutoff", material.file, "cutoff_eV")
    basis = PlaneWaveBasis(miller=full.basis.miller[keep], g_cart_invA=g[keep],
                           cutoff_eV=float(cutoff_eV))
    structure = (None if full.structure is None else
                 np.ascontiguousarray(full.structure[:, keep][:, :, keep]))
    return PlaneWaveModel(basis=basis, reciprocal_invA=full.reciprocal_invA,
                          potential_eV=np.ascontiguousarray(full.potential_eV[np.ix_(keep, keep)]),
                          spin_orbit=full.spin_orbit, structure=structure,
                          kinetic_factor=full.kinetic_factor, nonlocal_term=full.nonlocal_term)


@dataclass(frozen=True)
class ReducedBasisModel:
    """H(k) on reduced bases: polynomials in k on a few vectors, and how they were built.

    Attributes
    ----------
    patches : tuple of KPolynomial
        B†H0B and B†QB on each basis: one for the whole zone, or one per coarse point.
    centres_cart_invA : numpy.ndarray
        (n_patches, d) the point each basis serves: a dense point takes the basis of the
        nearest centre (Γ alone for one basis over the zone).
    n_bands : int
        Bands of the window (the ones interpolated).
    settings : ReducedBasisSettings
    fixed : PlaneWaveModel
        The fixed superset of plane waves the bases are expanded in.
    coarse_points : int
        Coarse points diagonalised exactly (zone-boundary images included).
    """

    patches: tuple[KPolynomial, ...]
    centres_cart_invA: np.ndarray
    n_bands: int
    settings: ReducedBasisSettings
    fixed: PlaneWaveModel = field(repr=False)
    coarse_points: int

    @property
    def fixed_size(self) -> int:
        """Plane waves of the fixed superset."""
        return self.fixed.size

    @property
    def sizes(self) -> np.ndarray:
        """Dimension of each reduced basis."""
        return np.array([p.size for p in self.patches])

    @property
    def size(self) -> int:
        """Largest reduced basis."""
        return int(self.sizes.max())

    def nearest_patch(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """(n_k,) index of the basis serving each point (the nearest centre, in blocks)."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        if len(self.patches) == 1:
            return np.zeros(len(k), dtype=np.int64)
        c = self.centres_cart_invA
        out = np.empty(len(k), dtype=np.int64)
        c2 = np.einsum("ci,ci->c", c, c)
        for s in range(0, len(k), 8192):
            kb = k[s:s + 8192]
            out[s:s + len(kb)] = np.argmin(c2[None, :] - 2.0 * kb @ c.T, axis=1)
        return out

    def groups(self, k_cart_invA: np.ndarray):
        """(patch, row indices) pairs: the points each basis serves."""
        near = self.nearest_patch(k_cart_invA)
        order = np.argsort(near, kind="stable")
        cuts = np.flatnonzero(np.diff(near[order])) + 1
        for rows in np.split(order, cuts):
            if len(rows):
                yield self.patches[near[rows[0]]], rows

    def energies(self, k_cart_invA: np.ndarray, n_bands: int | None = None) -> np.ndarray:
        """Interpolated (n_k, n_bands) absolute energies at any k (eV), one BLAS thread."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        nb = n_bands or self.n_bands
        out = np.empty((len(k), nb))
        blocks = [(patch, rows[s:s + 512]) for patch, rows in self.groups(k)
                  for s in range(0, len(rows), 512)]
        with single_blas_thread():
            for rows, e in threaded_map(lambda b: (b[1], b[0].eigenvalues(k[b[1]], nb)),
                                        blocks):
                out[rows] = e
        return out


def _compress(states: np.ndarray, tolerance: float, least: int) -> np.ndarray:
    """Orthonormal basis of the span of the columns, singular values σ ≥ tolerance·σ_max."""
    u, sigma, _ = np.linalg.svd(states, full_matrices=False)
    kept = max(least, int(np.count_nonzero(sigma >= tolerance * sigma[0])))
    return u[:, :kept]


def build_reduced_basis(material: Material, cutoff_eV: float, n_bands: int,
                        settings: ReducedBasisSettings = ReducedBasisSettings()
                        ) -> ReducedBasisModel:
    """Reduced bases of a material from the exact states on a coarse mesh (Shirley 1996).

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Plane-wave cutoff of the k-centred bases the fixed set must hold.
    n_bands : int
        Bands of the window (spinor bands with spin–orbit coupling: a Kramers pair is two);
        ``settings.buffer_bands`` more are kept at each coarse point.
    settings : ReducedBasisSettings

    Returns
    -------
    ReducedBasisModel
    """
    s = settings.checked()
    b = build_k_centred_model(material, cutoff_eV).reciprocal_invA
    coarse = zone_images(full_grid_frac((s.coarse_mesh,) * material.dimension), b)
    n_keep = n_bands + s.buffer_bands
    fixed = fixed_superset_model(material, cutoff_eV, coarse)
    if n_keep > fixed.matrix_size:
        raise InputError(f"{n_bands} bands and {s.buffer_bands} buffer bands asked for but the "
                         f"fixed basis holds only {fixed.matrix_size} states", material.file,
                         "buffer_bands")
    stack_bytes = fixed.matrix_size * len(coarse) * n_keep * (8 if fixed.is_real else 16)
    if stack_bytes > MAX_STACK_BYTES:
        raise InputError(f"a coarse mesh of {s.coarse_mesh} per axis stacks {len(coarse)} × "
                         f"{n_keep} states of {fixed.matrix_size} components "
                         f"({stack_bytes / 2**30:.1f} GiB; the limit is "
                         f"{MAX_STACK_BYTES / 2**30:.0f} GiB); expected a smaller coarse mesh "
                         "or fewer bands", material.file, "coarse_mesh")
    full = k_polynomial(fixed)
    n_extra = min(n_keep + GROUP_MARGIN, fixed.matrix_size)
    states = []
    with single_blas_thread():
        for k in coarse:
            w, v = scipy.linalg.eigh(fixed.hamiltonian(k), subset_by_index=(0, n_extra - 1),
                                     driver="evr", check_finite=False)
            # a degenerate group cut by the window's edge would break the symmetry of the span
            # (Kramers pairs, point-group multiplets): keep it whole
            count = n_keep
            while count < n_extra and w[count] - w[count - 1] <= DEGENERATE_STATES_EV:
                count += 1
            states.append(v[:, :count])
        if s.local_radius == 0:
            stacked = np.concatenate(states, axis=1)
            patches = (full.project(_compress(stacked, s.basis_tolerance, n_keep)),)
            centres = np.zeros((1, material.dimension))
        else:
            dist = np.linalg.norm(coarse[:, None, :] - coarse[None, :, :], axis=-1)
            spacing = float(np.min(dist[dist > 1e-9]))
            patches = []
            for i in range(len(coarse)):
                near = np.flatnonzero(dist[i] <= s.local_radius * spacing * (1 + 1e-9))
                stacked = np.concatenate([states[j] for j in near], axis=1)
                patches.append(full.project(_compress(stacked, s.basis_tolerance, n_keep)))
            patches, centres = tuple(patches), coarse
    return ReducedBasisModel(patches=patches, centres_cart_invA=centres, n_bands=n_bands,
                             settings=s, fixed=fixed, coarse_points=len(coarse))
