"""Full-zone k·p: the eigenstates at one k0 as the basis for the whole Brillouin zone.

In the basis of the lowest N eigenstates |n⟩ of H(k0), the plane-wave Hamiltonian at k0 + q is

    H_nm(k0 + q) = E_n(k0) δ_nm + 2C q·π_nm + βC q² δ_nm,     C = ħ²/2m0,

with π_nm = β p_nm/ħ and β the kinetic factor (:mod:`bandpert.physics.mass_tensor`). Keeping
every basis state it is a
unitary transform of the plane-wave H(k0 + q) and gives the exact bands; truncating to N states is
the full-zone k·p method of Cardona & Pollak, Phys. Rev. 142, 530 (1966).

A truncated basis must hold whole multiplets of H(k0): keeping part of a degenerate level picks
an arbitrary combination of its states and breaks the crystal's symmetry (silicon at Γ: levels
29–31 at 54.4575 eV; 30 states put the three equivalent Δ points (½, 0, 0), (0, ½, 0),
(0, 0, ½)·2π/a up to 4.4 meV apart). :func:`close_multiplets` rounds each requested size up to
the end of its multiplet.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..errors import InputError
from ..input.material import Material
from ..physics.bands import BandStructure, compute_band_structure
from ..physics.mass_tensor import eigenstates
from ..planewave.model import PlaneWaveModel
from ..planewave.solver import exact_energies, single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²


def kp_basis_energies(model: PlaneWaveModel, k0_cart_invA: np.ndarray, n_basis: int,
                      k_cart_invA: np.ndarray, n_bands: int) -> np.ndarray:
    """Bands at ``k_cart_invA`` from the ``n_basis`` lowest eigenstates at ``k0`` (eV).

    Parameters
    ----------
    model : PlaneWaveModel
    k0_cart_invA : numpy.ndarray
        (d,) the expansion point (e.g. Γ).
    n_basis : int
        Eigenstates of H(k0) kept as the basis.
    k_cart_invA : numpy.ndarray
        (n_k, d) where the bands are wanted.
    n_bands : int
        Bands returned (at most ``n_basis``).

    Returns
    -------
    numpy.ndarray
        (n_k, n_bands), ascending at each k.
    """
    if not 1 <= n_bands <= n_basis <= model.matrix_size:
        raise InputError(f"expected 1 ≤ bands ({n_bands}) ≤ basis states ({n_basis}) ≤ basis "
                         f"size ({model.matrix_size})", key="basis")
    if model.k_dependent:
        return projected_energies(model, k0_cart_invA, n_basis, k_cart_invA, n_bands)
    states = eigenstates(model, k0_cart_invA, n_basis)
    pi = states.momentum_invA  # (d, N, N)
    q = np.atleast_2d(k_cart_invA) - np.asarray(k0_cart_invA, dtype=float)
    out = np.empty((len(q), n_bands))
    step = max(1, 4_000_000 // n_basis**2)
    for s in range(0, len(q), step):
        qs = q[s:s + step]
        h = 2.0 * C * np.einsum("ki,inm->knm", qs, pi)
        diag = (states.energies_eV[None, :]
                + states.kinetic_factor * C * np.einsum("ki,ki->k", qs, qs)[:, None])
        idx = np.arange(n_basis)
        h[:, idx, idx] += diag
        out[s:s + step] = np.linalg.eigvalsh(h)[:, :n_bands]
    return out


def projected_energies(model: PlaneWaveModel, k0_cart_invA: np.ndarray, n_basis: int,
                       k_cart_invA: np.ndarray, n_bands: int) -> np.ndarray:
    """Bands at ``k_cart_invA`` from H(k) projected on the ``n_basis`` lowest states of H(k0).

    With U the lowest eigenvectors of H(k0), the bands are the eigenvalues of U† H(k) U
    (Rayleigh–Ritz in the fixed span; by Cauchy interlacing each lies at or above the exact
    band of the same index). For a local spinless model this is exactly the full-zone k·p
    matrix E_n δ_nm + 2C q·π_nm + βC q² δ_nm, since H(k0 + q) − H(k0) = βC(2q·(k0 + G) + q²)
    δ_GG′ (β the kinetic factor); the spin–orbit term (its radial factors B(|k + G|)) and the
    nonlocal wells are not polynomial in k, so they are projected at each k instead, as the
    reduced-basis interpolation does (Shirley, Phys. Rev. B 54, 16464 (1996)). Spinor models
    count spinor states (a Kramers pair is two).

    Parameters and returns as :func:`kp_basis_energies`.
    """
    h0 = model.hamiltonian(np.asarray(k0_cart_invA, dtype=float))
    _, u = scipy.linalg.eigh(h0, subset_by_index=(0, n_basis - 1), driver="evr",
                             check_finite=False)
    k = np.atleast_2d(k_cart_invA)
    out = np.empty((len(k), n_bands))
    with single_blas_thread():
        for i, kk in enumerate(k):
            hp = u.conj().T @ (model.hamiltonian(kk) @ u)
            out[i] = scipy.linalg.eigvalsh(0.5 * (hp + hp.conj().T), subset_by_index=(
                0, n_bands - 1), check_finite=False)
    return out


#: Levels of H(k0) closer than this (eV) form one multiplet when basis sizes are rounded. At Γ a
#: cutoff basis holds whole stars of G, so H(Γ) has the crystal's full point group and its
#: symmetry-required degeneracies hold to rounding (silicon, 259 plane waves: 4e-13 eV), while
#: distinct levels lie further apart (silicon: 3.3 meV at the least). Merging two accidentally
#: close levels only enlarges a basis, which costs nothing in accuracy.
MULTIPLET_TOL_EV = 1e-6

#: Γ states tried by default (each rounded up to close its multiplet).
DEFAULT_BASIS_SIZES: tuple[int, ...] = (15, 30, 60, 120)

#: The band figure shows the largest truncated basis whose error along the path is at least
#: this (eV): large enough to see beside the exact bands, unlike a converged one that overlays
#: them.
VISIBLE_ERROR_EV = 0.05


def close_multiplets(levels_eV: np.ndarray, sizes: np.ndarray | tuple[int, ...],
                     tol_eV: float = MULTIPLET_TOL_EV) -> np.ndarray:
    """Each basis size rounded up to the end of the multiplet its last state belongs to.

    Parameters
    ----------
    levels_eV : numpy.ndarray
        (n,) ascending levels of H(k0), all of them (the whole basis).
    sizes : array_like of int
        Requested numbers of states, 1 ≤ size ≤ n.
    tol_eV : float
        Consecutive levels closer than this are one multiplet.

    Returns
    -------
    numpy.ndarray
        (len(sizes),) sizes that end on a gap wider than ``tol_eV`` (or on n).
    """
    levels = np.asarray(levels_eV, dtype=float)
    ends = np.append(np.flatnonzero(np.diff(levels) > tol_eV) + 1, levels.size)
    wanted = np.asarray(sizes, dtype=int)
    return ends[np.searchsorted(ends, wanted, side="left")]


@dataclass(frozen=True)
class KpConvergence:
    """Full-zone k·p bands against the exact ones as the basis grows.

    Attributes
    ----------
    basis_sizes : numpy.ndarray
        (n_s,) numbers of k0 eigenstates kept, each closing a multiplet of H(k0); the last is
        the whole plane-wave basis.
    requested_sizes : numpy.ndarray
        The sizes asked for (sorted, without repeats).
    rounded_sizes : numpy.ndarray
        Each requested size rounded up to close its multiplet (:func:`close_multiplets`).
    max_error_eV : numpy.ndarray
        (n_s,) largest |E_kp − E_exact| over the path and the bands.
    rms_error_eV : numpy.ndarray
        (n_s,) root-mean-square error.
    energies_eV : numpy.ndarray
        (n_s, n_k, n_bands) the k·p bands.
    shown_index : int
        The size worth drawing beside the exact bands: the largest truncated one whose largest
        error is at least :data:`VISIBLE_ERROR_EV`, else the smallest truncated one.
    """

    basis_sizes: np.ndarray
    requested_sizes: np.ndarray
    rounded_sizes: np.ndarray
    max_error_eV: np.ndarray
    rms_error_eV: np.ndarray
    energies_eV: np.ndarray
    shown_index: int


def kp_convergence(model: PlaneWaveModel, k0_cart_invA: np.ndarray, k_cart_invA: np.ndarray,
                   n_bands: int, basis_sizes: tuple[int, ...] = DEFAULT_BASIS_SIZES,
                   exact_eV: np.ndarray | None = None,
                   tol_eV: float = MULTIPLET_TOL_EV) -> KpConvergence:
    """Convergence of full-zone k·p bands with the number of basis states.

    Each size is rounded up to close its multiplet of H(k0) (:func:`close_multiplets`); sizes
    below ``n_bands`` are dropped; the whole plane-wave basis is always added last, where the
    method is exact.
    """
    requested = np.unique(np.asarray(basis_sizes, dtype=int))
    full = model.matrix_size
    levels = exact_energies(model, np.atleast_2d(k0_cart_invA), full)[0]
    closed = close_multiplets(levels, np.clip(requested, 1, full), tol_eV)
    sizes = np.array(sorted({int(s) for s in closed if n_bands <= s < full} | {full}))
    exact = exact_energies(model, k_cart_invA, n_bands) if exact_eV is None else exact_eV
    bands = np.array([kp_basis_energies(model, k0_cart_invA, s, k_cart_invA, n_bands)
                      for s in sizes])
    err = np.abs(bands - exact[None])
    max_err = err.max(axis=(1, 2))
    visible = np.flatnonzero(max_err[:-1] >= VISIBLE_ERROR_EV)
    shown = int(visible[-1]) if visible.size else 0
    return KpConvergence(basis_sizes=sizes, requested_sizes=requested, rounded_sizes=closed,
                         max_error_eV=max_err,
                         rms_error_eV=np.sqrt((err**2).mean(axis=(1, 2))), energies_eV=bands,
                         shown_index=shown)


@dataclass(frozen=True, eq=False)
class FullZoneResult:
    """Full-zone k·p from Γ along a material's path, against the exact bands.

    Attributes
    ----------
    exact : BandStructure
        The exact bands along the path (and the plane-wave model, path and energy zero).
    convergence : KpConvergence
        The k·p bands for each basis size and their errors.
    """

    exact: BandStructure
    convergence: KpConvergence


def full_zone_kp(material: Material, basis_sizes: tuple[int, ...] = DEFAULT_BASIS_SIZES,
                 n_k: int = 120, n_bands: int | None = None,
                 cutoff_eV: float | None = None) -> FullZoneResult:
    """Full-zone k·p from the Γ eigenstates along the whole path (Cardona & Pollak 1966).

    Parameters
    ----------
    material : Material
    basis_sizes : tuple of int
        Numbers of Γ eigenstates to keep, each rounded up to close its multiplet (the whole
        plane-wave basis is added).
    n_k : int
        Points along the path.
    n_bands : int, optional
        Bands compared (default: the material's).
    cutoff_eV : float, optional
        Plane-wave cutoff (default: the file's, else the converged one, by the one cutoff rule
        :func:`~bandpert.planewave.cutoff.choose_cutoff`); it bounds the work: the whole
        basis is diagonalised along the path for the exact comparison.

    Returns
    -------
    FullZoneResult
    """
    if not basis_sizes or min(basis_sizes) < 1:
        raise InputError("expected positive numbers of states", key="basis_sizes")
    bs = compute_band_structure(material, n_k=n_k, n_bands=n_bands, cutoff_eV=cutoff_eV)
    # errors against the exact bands in the same fixed Γ-centred basis, where the full basis
    # is exact (bs.energies_eV use a basis centred on each k: different by up to a few meV)
    conv = kp_convergence(bs.model, np.zeros(material.dimension), bs.path.k_cart_invA,
                          bs.n_bands, tuple(basis_sizes))
    return FullZoneResult(exact=bs, convergence=conv)
