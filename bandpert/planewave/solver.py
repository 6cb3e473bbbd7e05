"""The exact solver of a plane-wave model: eigenvalues of H(k) = H0(k) + V by LAPACK.

Only the bands asked for are computed; BLAS runs on one thread per process for the per-k work
(:func:`single_blas_thread`). Large local spinless bases go to the warm-started iterative
solver instead (:mod:`bandpert.planewave.iterative`), chosen by :func:`choose_solver`.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import AbstractContextManager

import numpy as np
import scipy.linalg
import scipy.linalg.lapack
from threadpoolctl import ThreadpoolController

from ..errors import InputError
from ..units import HBAR2_OVER_2M0_EV_A2
from .iterative import buffer_bands, iterative_energies
from .model import KCentredModel, PlaneWaveModel
from .spinorbit import spinor_hamiltonian

#: Below this basis size the eigenvalues of a block of k-points come from one batched numpy call
#: (all eigenvalues, divide and conquer); above it, LAPACK's MRRR driver per k-point, only the
#: bands asked for. Measured crossover on the bundled materials (one BLAS thread, 200 k-points):
#: batched is 30 % faster at 65–89 plane waves and 5 % at 113, per-k MRRR 8 % faster at 169.
BATCH_BELOW = 128

#: Bytes of Hamiltonians held at once by the batched path (memory does not grow with n_k).
BATCH_BYTES = 16 * 2**20

#: From this basis size on, ``solver="auto"`` uses the iterative solver for local spinless
#: models. Measured crossover (tests/benchmarks/iterative.py, silicon, 16 bands, 12 k): LAPACK
#: 1.7x faster at 531 plane waves, the iterative solver 1.1x at 725, 2.1x at 1037, 20x at 3071.
#: The switch sits above it so that the cutoff search (at most 1000 plane waves) and the
#: default-size commands stay on LAPACK.
ITERATIVE_FROM = 1000

#: ``solver="auto"`` keeps LAPACK when the iterated block (bands plus buffer) exceeds this share
#: of the basis: LOBPCG's work grows with the block squared, LAPACK's hardly with the bands.
ITERATIVE_MAX_BLOCK_SHARE = 0.1

#: The solvers :func:`exact_energies` accepts.
SOLVERS = ("auto", "dense", "iterative")

Progress = Callable[[int, int], None]

_THREADPOOLS: list = []


def single_blas_thread() -> AbstractContextManager:
    """Context in which BLAS/LAPACK run on one thread (threadpoolctl), for the per-k work.

    The matrices of a plane-wave model are small (n of a few hundred): on the 2-core benchmark
    machine one BLAS thread is as fast as two for the exact and the perturbative bands when the
    machine is idle, and several times faster when the other core is busy (the second thread
    then waits for a core at every synchronisation).
    """
    if not _THREADPOOLS:
        _THREADPOOLS.append(ThreadpoolController())
    return _THREADPOOLS[0].limit(limits=1, user_api="blas")


def _mrrr_solver(n: int, n_bands: int, complex_: bool) -> Callable[[np.ndarray], np.ndarray]:
    """The LAPACK call ``scipy.linalg.eigh(..., subset_by_index, driver="evr")`` makes, bound once.

    Same routine, arguments and optimal workspace as scipy's wrapper (so the same numbers),
    without re-validating the arguments and querying the workspace at every k-point.
    """
    prefix = "he" if complex_ else "sy"
    drv, query = scipy.linalg.lapack.get_lapack_funcs(
        (prefix + "evr", prefix + "evr_lwork"), dtype=complex if complex_ else float)
    *sizes, info = query(n, lower=1)
    if info != 0:
        raise RuntimeError(f"LAPACK workspace query failed (info = {info})")
    names = ("lwork", "lrwork", "liwork") if complex_ else ("lwork", "liwork")
    work = {name: int(size.real) for name, size in zip(names, sizes, strict=True)}

    def solve(h: np.ndarray) -> np.ndarray:
        w, _, _, _, info = drv(h, compute_v=0, range="I", lower=1, il=1, iu=n_bands,
                               overwrite_a=1, **work)
        if info != 0:
            raise np.linalg.LinAlgError(f"LAPACK ?syevr/?heevr failed (info = {info})")
        return w[:n_bands]

    return solve


def choose_solver(model: PlaneWaveModel | KCentredModel, n_bands: int,
                  solver: str = "auto") -> str:
    """The solver :func:`exact_energies` uses: "dense" (LAPACK) or "iterative" (LOBPCG).

    ``"auto"`` picks the iterative solver for a local spinless model of at least
    :data:`ITERATIVE_FROM` plane waves whose block (``n_bands`` plus the buffer bands) stays
    within :data:`ITERATIVE_MAX_BLOCK_SHARE` of the basis; LAPACK otherwise. Spin–orbit and
    nonlocal models always use LAPACK: asking for ``"iterative"`` on them is refused.

    Parameters
    ----------
    model : PlaneWaveModel or KCentredModel
    n_bands : int
    solver : str
        "auto", "dense" or "iterative".

    Returns
    -------
    str
        "dense" or "iterative".
    """
    if solver not in SOLVERS:
        raise InputError(f"unknown solver {solver!r}; expected one of {', '.join(SOLVERS)}",
                         key="solver")
    if solver == "iterative" and model.k_dependent:
        raise InputError("the iterative solver takes local spinless models only (spin–orbit and "
                         "nonlocal terms are built densely per k); expected solver 'dense' or "
                         "'auto'", key="solver")
    if solver != "auto":
        return solver
    block = n_bands + buffer_bands(n_bands)
    if (model.k_dependent or model.size < ITERATIVE_FROM
            or block > ITERATIVE_MAX_BLOCK_SHARE * model.size):
        return "dense"
    return "iterative"


def exact_energies(model: PlaneWaveModel | KCentredModel, k_cart_invA: np.ndarray, n_bands: int,
                   progress: Progress | None = None, solver: str = "auto") -> np.ndarray:
    """Lowest ``n_bands`` eigenvalues of H(k) at each k-point, ascending.

    H(k) = H0(k) + V is assembled per k from the k-independent V; LAPACK's MRRR driver
    (``?syevr``/``?heevr``) computes only the requested eigenvalues. Bases below
    :data:`BATCH_BELOW` plane waves are diagonalised in blocks of k-points by one
    :func:`numpy.linalg.eigvalsh` call per block. BLAS runs on one thread
    (:func:`single_blas_thread`); the kinetic diagonal is built per block of k-points, so the
    memory beyond the (n_k, n_bands) result does not grow with the number of k-points.

    A :class:`~bandpert.planewave.model.KCentredModel` is diagonalised at each k in its own
    basis ħ²|k+G|²/2m0 ≤ cutoff (:func:`_k_centred_energies`); a
    :class:`~bandpert.planewave.model.PlaneWaveModel` in its one fixed basis. A model with
    spin–orbit coupling or nonlocal terms is built and diagonalised per k
    (:func:`_per_k_energies`); with spin–orbit coupling in spinor plane waves, and then
    ``n_bands`` counts spinor bands (a Kramers pair is two bands).

    Parameters
    ----------
    model : PlaneWaveModel or KCentredModel
    k_cart_invA : numpy.ndarray
        (n_k, d) Cartesian wave vectors (Å⁻¹).
    n_bands : int
        Number of bands; at most the basis size (twice it for spinor bands).
    progress : callable, optional
        Called as ``progress(done, total)``.
    solver : str
        "auto" (default: :func:`choose_solver`), "dense" (LAPACK) or "iterative"
        (:func:`~bandpert.planewave.iterative.iterative_energies`, residual norms below 1e-6 eV,
        eigenvalues equal to LAPACK's to 1e-8 eV; warm-started along the list of k-points).

    Returns
    -------
    numpy.ndarray
        (n_k, n_bands) energies in eV (absolute: the model's own zero).
    """
    if choose_solver(model, n_bands, solver) == "iterative":
        with single_blas_thread():
            return iterative_energies(model, k_cart_invA, n_bands, progress).energies_eV
    if model.k_dependent:
        return _per_k_energies(model, k_cart_invA, n_bands, progress)
    if isinstance(model, KCentredModel):
        return _k_centred_energies(model, k_cart_invA, n_bands, progress)
    n = model.size
    if n_bands > n:
        raise InputError(f"{n_bands} bands asked for but the basis holds only {n} plane waves; "
                         "expected fewer bands or a larger cutoff", key="bands")
    k = np.atleast_2d(k_cart_invA)
    n_k = len(k)
    v = model.potential_eV
    out = np.empty((n_k, n_bands))
    diag = np.arange(n)
    block = max(1, min(n_k, BATCH_BYTES // (n * n * v.itemsize)))
    with single_blas_thread():
        if n < BATCH_BELOW:
            h = np.empty((block, n, n), dtype=v.dtype)
            for start in range(0, n_k, block):
                stop = min(n_k, start + block)
                hb = h[: stop - start]
                hb[:] = v
                hb[:, diag, diag] += model.kinetic_eV(k[start:stop])
                out[start:stop] = np.linalg.eigvalsh(hb)[:, :n_bands]
                if progress:
                    progress(stop, n_k)
            return out
        solve = _mrrr_solver(n, n_bands, np.iscomplexobj(v))
        v_f = np.asfortranarray(v)  # LAPACK's layout: no copy inside the wrapper
        h = np.empty_like(v_f)
        step = max(1, n_k // 50)
        for start in range(0, n_k, block):
            kinetic = model.kinetic_eV(k[start:start + block])
            for j, row in enumerate(kinetic):
                i = start + j
                np.copyto(h, v_f)
                h[diag, diag] += row
                out[i] = solve(h)
                if progress and (i % step == 0 or i == n_k - 1):
                    progress(i + 1, n_k)
    return out


def _k_centred_energies(model: KCentredModel, k_cart_invA: np.ndarray, n_bands: int,
                        progress: Progress | None = None) -> np.ndarray:
    """Lowest ``n_bands`` eigenvalues of H(k) in the basis ħ²|k+G|²/2m0 ≤ cutoff at each k.

    H(k)_{ij} = ħ²|k+G_i|²/2m0 δ_ij + V(G_i − G_j) is gathered from the model's table of V
    (one indexing operation per k). The per-k sizes differ by a few plane waves (silicon at its
    default cutoff: 242–268 along the path, 259 at Γ). Below :data:`BATCH_BELOW` plane waves
    the k-points of a block that share a basis size are diagonalised together by one
    :func:`numpy.linalg.eigvalsh` call (no padding: each k gets exactly its own matrix, so the
    numbers do not depend on the blocks); above it, LAPACK's MRRR driver runs per k at that
    k's own size. A k whose basis would hold fewer plane waves than ``n_bands`` (only at tiny
    cutoffs) takes every shell |k+G| up to its ``n_bands``-th lowest plane wave instead.
    """
    if n_bands > model.size:
        raise InputError(f"{n_bands} bands asked for but the basis holds only {model.size} plane "
                         "waves; expected fewer bands or a larger cutoff", key="bands")
    k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
    n_k = len(k)
    reach = float(np.max(np.linalg.norm(k, axis=1), initial=0.0))
    cand, flat, table, origin = model.candidates(reach)
    g = cand.g_cart_invA
    limit = model.cutoff_eV * (1 + 1e-12)
    out = np.empty((n_k, n_bands))
    n_ref = model.size
    block = max(1, min(n_k, BATCH_BYTES // (n_ref * n_ref * table.itemsize)))
    solvers: dict[int, Callable[[np.ndarray], np.ndarray]] = {}
    step = max(1, n_k // 50)
    base = members = None
    with single_blas_thread():
        for start in range(0, n_k, block):
            stop = min(n_k, start + block)
            kg = k[start:stop, None, :] + g[None, :, :]
            free = HBAR2_OVER_2M0_EV_A2 * np.einsum("kgi,kgi->kg", kg, kg)  # the cutoff's
            kinetic = model.kinetic_factor * free  # H0's diagonal
            # at a cutoff so small that some k holds fewer plane waves than bands, that k takes
            # the whole shells up to its n_bands-th lowest plane wave (still symmetric)
            lowest = np.partition(free, n_bands - 1, axis=1)[:, n_bands - 1]
            inside = free <= np.maximum(limit, lowest * (1 + 1e-12))[:, None]
            sizes = inside.sum(axis=1)
            if sizes.min() < n_bands:
                raise InputError(f"{n_bands} bands asked for but the basis at some k holds only "
                                 f"{int(sizes.min())} plane waves; expected fewer bands or a "
                                 "larger cutoff", key="bands")
            if n_ref < BATCH_BELOW:
                # one batched call per basis size: every k gets exactly its own matrix, so the
                # numbers do not depend on which other k-points share its block
                for n in np.unique(sizes):
                    rows = np.flatnonzero(sizes == n)
                    order = np.argsort(~inside[rows], axis=1, kind="stable")[:, :n]
                    codes = flat[order]
                    h = table[origin + codes[:, :, None] - codes[:, None, :]]
                    r = np.arange(n)
                    h[:, r, r] += np.take_along_axis(kinetic[rows], order, axis=1)
                    out[start + rows] = np.linalg.eigvalsh(h)[:, :n_bands]
                if progress:
                    progress(stop, n_k)
                continue
            for j in range(stop - start):
                i = start + j
                if base is None or not np.array_equal(inside[j], members):
                    # a new set of plane waves (about one k in three along a path): gather H
                    members = inside[j]
                    sel = np.flatnonzero(members)
                    codes = flat[sel]
                    # H is Hermitian: the transpose (a Fortran-ordered view) has its eigenvalues
                    base = table[origin + codes[:, None] - codes[None, :]].T
                    h = np.empty_like(base)
                    n = len(sel)
                    diag = np.arange(n)
                    if n not in solvers:
                        solvers[n] = _mrrr_solver(n, n_bands, np.iscomplexobj(table))
                np.copyto(h, base)
                h[diag, diag] += kinetic[j, sel]
                out[i] = solvers[n](h)
                if progress and (i % step == 0 or i == n_k - 1):
                    progress(i + 1, n_k)
    return out


def _per_k_energies(model: PlaneWaveModel | KCentredModel, k_cart_invA: np.ndarray,
                    n_bands: int, progress: Progress | None = None) -> np.ndarray:
    """Lowest ``n_bands`` eigenvalues of H(k) built per k (spin–orbit or nonlocal terms).

    The matrices come from :func:`per_k_hamiltonians`; LAPACK's ``zheevr`` computes the
    requested eigenvalues of each.
    """
    k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
    n_k = len(k)
    m = model.n_components
    if n_bands > m * model.size:
        raise InputError(f"{n_bands} bands asked for but the basis holds only "
                         f"{m * model.size} states; expected fewer bands or a larger cutoff",
                         key="bands")
    out = np.empty((n_k, n_bands))
    step = max(1, n_k // 50)
    solvers: dict[int, Callable[[np.ndarray], np.ndarray]] = {}
    with single_blas_thread():
        for i, h in enumerate(per_k_hamiltonians(model, k, -(-n_bands // m))):
            n = h.shape[0]
            if n not in solvers:
                solvers[n] = _mrrr_solver(n, n_bands, True)
            out[i] = solvers[n](h)
            if progress and (i % step == 0 or i == n_k - 1):
                progress(i + 1, n_k)
    return out


def per_k_hamiltonians(model: PlaneWaveModel | KCentredModel, k_cart_invA: np.ndarray,
                       min_plane_waves: int = 1) -> Iterator[np.ndarray]:
    """H(k) = H0 + V + V_NL(k) (n × n), or with spin–orbit coupling the spinor
    1₂ ⊗ (H0 + V + V_NL(k)) + H_so(k) (2n × 2n), at each k in turn (Fortran order); with an
    energy-dependent well S^{−1/2} H S^{−1/2} (:mod:`~bandpert.planewave.nonlocal_term`).

    Per k: V and the structure factors S_s(G_i − G_j) are gathered once per set of plane
    waves (reused while consecutive k-points share it), the spin–orbit coupling W(k) and the
    nonlocal wells are built from K = k + G by whole-matrix operations
    (:meth:`~bandpert.planewave.spinorbit.SpinOrbitTerm.coupling`,
    :meth:`~bandpert.planewave.nonlocal_term.NonlocalTerm.matrix`). A
    :class:`~bandpert.planewave.model.KCentredModel` uses the basis ħ²|k+G|²/2m0 ≤ cutoff at
    each k (a k whose basis holds fewer than
    ``min_plane_waves`` takes whole shells up to its ``min_plane_waves``-th lowest plane
    wave); a :class:`~bandpert.planewave.model.PlaneWaveModel` its one basis. Only one matrix
    is held at a time. Component s·n + i of a row index is |k + G_i, s⟩, s = 0 (↑), 1 (↓).

    Parameters
    ----------
    model : PlaneWaveModel or KCentredModel
        With a spin–orbit term.
    k_cart_invA : numpy.ndarray
        (n_k, 3) Cartesian wave vectors (Å⁻¹).
    min_plane_waves : int
        Fewest plane waves of a k-centred basis.

    Yields
    ------
    numpy.ndarray
        Complex Hermitian H(k); the caller may overwrite it.
    """
    k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
    term = model.spin_orbit
    wells = model.nonlocal_term
    centred = isinstance(model, KCentredModel)
    if centred:
        reach = float(np.max(np.linalg.norm(k, axis=1), initial=0.0))
        cand, flat, table, origin = model.candidates(reach)
        structure_rows = model.structure_table(reach)
        g_all = cand.g_cart_invA
        limit = model.cutoff_eV * (1 + 1e-12)
    else:
        base, structure = model.potential_eV, model.structure
        g = model.basis.g_cart_invA
    members = None
    for kk in k:
        if centred:
            kg_all = kk + g_all
            free_all = HBAR2_OVER_2M0_EV_A2 * np.einsum("gi,gi->g", kg_all, kg_all)
            lowest = np.partition(free_all, min_plane_waves - 1)[min_plane_waves - 1]
            inside = free_all <= max(limit, lowest * (1 + 1e-12))
            if members is None or not np.array_equal(inside, members):
                members = inside
                sel = np.flatnonzero(inside)
                codes = flat[sel]
                diff = origin + codes[:, None] - codes[None, :]
                base = table[diff]
                structure = structure_rows[:, diff]
                g = g_all[sel]
            kinetic = model.kinetic_factor * free_all[sel]
        else:
            kinetic = model.kinetic_eV(kk)[0]
        n = len(g)
        h = base.astype(complex)
        h[np.arange(n), np.arange(n)] += kinetic
        if wells is not None:
            h += wells.matrix(kk + g, structure)
        if term is not None:
            w = term.coupling(kk + g, structure)
            h = spinor_hamiltonian(h, w, np.empty((2 * n, 2 * n), complex, order="F"))
        if wells is not None:  # S^{-1/2} H_c S^{-1/2} for an energy-dependent well
            h = wells.orthogonalised(h, kk + g)
        yield np.asfortranarray(h)


def exact_states(model: PlaneWaveModel, k_cart_invA: np.ndarray, n_bands: int
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``n_bands`` eigenvalues and eigenvectors of H(k) at one k, spinor or spinless.

    For labels and matrix elements: with spin–orbit coupling the eigenvectors are spinors,
    row s·n + i the amplitude of |k + G_i, s⟩ (s = 0 up, 1 down; n = ``model.size``, G_i =
    ``model.basis.g_cart_invA[i]``). Use a fixed basis centred on k
    (:meth:`~bandpert.planewave.model.KCentredModel.at` with ``spin_orbit=True``) so that the
    degenerate sets the little group of k requires are exact.

    Returns
    -------
    energies_eV : numpy.ndarray
        (n_bands,) ascending.
    vectors : numpy.ndarray
        (matrix_size, n_bands) orthonormal columns.
    """
    h = model.hamiltonian(np.asarray(k_cart_invA, dtype=float))
    return scipy.linalg.eigh(h, subset_by_index=(0, n_bands - 1), driver="evr",
                             check_finite=False)
