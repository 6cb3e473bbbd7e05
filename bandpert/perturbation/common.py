"""Input checks shared by the perturbation modules (arrays only, no crystals).

The unperturbed Hamiltonian is ``H0 = diag(e0)`` (real energies) and ``V`` is Hermitian; the
physical case is ``λ = 1`` and orders are counted in ``λ``. Energies come back in the unit of
``e0`` and ``V`` (the callers use eV).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: Absolute tolerance (unit of ``e0``) below which two unperturbed energies count as equal.
DEFAULT_DEGENERACY_TOL: float = 1e-8

FloatArray = NDArray[np.float64]
Matvec = Callable[[NDArray], NDArray]


def _as_levels(e0: ArrayLike) -> FloatArray:
    e = np.asarray(e0, dtype=float)
    if e.ndim not in (1, 2) or e.shape[-1] == 0:
        raise ValueError(f"e0 must have shape (n,) or (n_k, n) with n >= 1, got {e.shape}")
    if not np.all(np.isfinite(e)):
        raise ValueError("e0 contains non-finite values")
    return e


def _as_coupling(v: ArrayLike, n: int, n_k: int | None, lam: float) -> NDArray:
    """Return ``lam * v`` as a float or complex array of shape (n, n) or (n_k, n, n)."""
    vv = np.asarray(v)
    if not (np.issubdtype(vv.dtype, np.floating) or np.issubdtype(vv.dtype, np.complexfloating)):
        vv = vv.astype(float)
    ok_shared = vv.shape == (n, n)
    ok_batched = n_k is not None and vv.shape == (n_k, n, n)
    if not (ok_shared or ok_batched):
        want = f"({n}, {n})" + (f" or ({n_k}, {n}, {n})" if n_k is not None else "")
        raise ValueError(f"v must have shape {want}, got {vv.shape}")
    if not np.all(np.isfinite(vv)):
        raise ValueError("v contains non-finite values")
    scale = float(np.max(np.abs(vv))) if vv.size else 0.0
    atol = 1e-10 * max(scale, 1e-300)
    if not np.allclose(vv, np.swapaxes(vv, -1, -2).conj(), rtol=0.0, atol=atol):
        raise ValueError("v must be Hermitian")
    return float(lam) * vv


def _check_tolerances(degeneracy_tol: float, coupling_threshold: float | None = None) -> None:
    if not degeneracy_tol >= 0.0:
        raise ValueError(f"degeneracy_tol must be >= 0, got {degeneracy_tol}")
    if coupling_threshold is not None and not coupling_threshold > 0.0:
        raise ValueError(f"coupling_threshold must be > 0, got {coupling_threshold}")


def _single(e0: ArrayLike, v: ArrayLike, lam: float) -> tuple[FloatArray, NDArray]:
    e = _as_levels(e0)
    if e.ndim != 1:
        raise ValueError("expected a single spectrum e0 of shape (n,)")
    return e, _as_coupling(v, e.size, None, lam)
