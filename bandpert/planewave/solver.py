"""The exact solver of a plane-wave model: eigenvalues of H(k) = H0(k) + V by LAPACK.

Only the bands asked for are computed; BLAS runs on one thread per process for the per-k work
(:func:`single_blas_thread`).
"""

from __future__ import annotations

from collections.abc import Callable
from contextlib import AbstractContextManager

import numpy as np
import scipy.linalg.lapack
from threadpoolctl import ThreadpoolController

from ..errors import InputError
from .model import PlaneWaveModel

#: Below this basis size the eigenvalues of a block of k-points come from one batched numpy call
#: (all eigenvalues, divide and conquer); above it, LAPACK's MRRR driver per k-point, only the
#: bands asked for. Measured crossover on the bundled materials (one BLAS thread, 200 k-points):
#: batched is 30 % faster at 65–89 plane waves and 5 % at 113, per-k MRRR 8 % faster at 169.
BATCH_BELOW = 128

#: Bytes of Hamiltonians held at once by the batched path (memory does not grow with n_k).
BATCH_BYTES = 16 * 2**20

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


def exact_energies(model: PlaneWaveModel, k_cart_invA: np.ndarray, n_bands: int,
                   progress: Progress | None = None) -> np.ndarray:
    """Lowest ``n_bands`` eigenvalues of H(k) at each k-point, ascending.

    H(k) = H0(k) + V is assembled per k from the k-independent V; LAPACK's MRRR driver
    (``?syevr``/``?heevr``) computes only the requested eigenvalues. Bases below
    :data:`BATCH_BELOW` plane waves are diagonalised in blocks of k-points by one
    :func:`numpy.linalg.eigvalsh` call per block. BLAS runs on one thread
    (:func:`single_blas_thread`); the kinetic diagonal is built per block of k-points, so the
    memory beyond the (n_k, n_bands) result does not grow with the number of k-points.

    Parameters
    ----------
    model : PlaneWaveModel
    k_cart_invA : numpy.ndarray
        (n_k, d) Cartesian wave vectors (Å⁻¹).
    n_bands : int
        Number of bands; at most the basis size.
    progress : callable, optional
        Called as ``progress(done, total)``.

    Returns
    -------
    numpy.ndarray
        (n_k, n_bands) energies in eV (absolute: the model's own zero).
    """
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
