"""Convergence radius in λ of a perturbation series from its coefficients.

:func:`convergence_radius` for a power series, :func:`level_convergence_radius` for a level of
``H0 + λ V`` (its Rayleigh–Schrödinger series, or the effective-Hamiltonian series of its
group).

References
----------
.. [K66] T. Kato, *Perturbation Theory for Linear Operators*, Springer (1966), ch. II
   (convergence radius, exceptional points).
.. [BGM] G. A. Baker and P. Graves-Morris, *Padé Approximants*, 2nd ed., Cambridge (1996).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import pade

from .common import DEFAULT_DEGENERACY_TOL, FloatArray, _single
from .lowdin import effective_hamiltonian_series
from .rs import rs_energy_series

__all__ = ["convergence_radius", "level_convergence_radius"]


def _structural_zeros(mags: FloatArray, zero_tol: float) -> NDArray[np.bool_]:
    """Coefficients that are rounding noise next to much larger neighbours (within 2 orders)."""
    padded = np.pad(mags, 2)
    neigh = np.max(np.stack([padded[s : s + mags.size] for s in (0, 1, 3, 4)]), axis=0)
    return mags <= zero_tol * neigh


def _tail_fit(p: FloatArray, logc: FloatArray) -> tuple[float, float, float]:
    """Least-squares log|c_p| = a + b p (+ α log p) over the upper two thirds of the points."""
    tail = p >= p[0] + (p[-1] - p[0]) / 3.0
    if tail.sum() < 2:
        tail = np.ones(p.size, dtype=bool)
    p, logc = p[tail], logc[tail]
    if p.size >= 6 and p[-1] - p[0] >= 10:
        design = np.stack([np.ones_like(p), p, np.log(p)], axis=1)
        sol = np.linalg.lstsq(design, logc, rcond=None)[0]
        return float(sol[0]), float(sol[1]), float(sol[2])
    design = np.stack([np.ones_like(p), p], axis=1)
    sol = np.linalg.lstsq(design, logc, rcond=None)[0]
    return float(sol[0]), float(sol[1]), 0.0


def _pade_radius(coeffs: NDArray, r0: float) -> float:
    """Smallest genuine pole modulus of a diagonal Padé approximant of the series."""
    n_terms = coeffs.size
    scaled = coeffs * r0 ** np.arange(n_terms, dtype=float)  # series in λ / r0, terms O(1)
    for m in range(min(20, (n_terms - 1) // 2), 0, -1):
        try:
            num, den = pade(scaled[: 2 * m + 1], m, m)
        except np.linalg.LinAlgError:
            continue  # degenerate Padé table (e.g. odd m for an even series)
        poles = np.roots(den.coeffs)
        zeros = np.roots(num.coeffs) if num.order > 0 else np.array([])
        good = [
            abs(z)
            for z in poles
            if abs(z) > 0.0
            and not (zeros.size and np.min(np.abs(zeros - z)) < 1e-3 * abs(z))  # Froissart
        ]
        return float(min(good)) * r0 if good else np.inf
    return np.inf


def convergence_radius(
    coefficients: ArrayLike,
    *,
    method: str = "root",
    zero_tol: float = 1e-9,
    floor: float = 1e-13,
) -> float:
    r"""Radius of convergence in λ of :math:`\sum_p c_p \lambda^p` from finitely many terms.

    ``method="root"`` (default): Cauchy–Hadamard root test,
    :math:`R = 1/\limsup |c_p|^{1/p}`, implemented as a least-squares fit of
    :math:`\log|c_p| = a + p\log(1/R) + \alpha \log p` over the upper two thirds of the
    non-zero coefficients with :math:`p \ge 1` (the :math:`\alpha \log p` term absorbs the
    power-law prefactor of a branch point, e.g. :math:`p^{-3/2}` for a square root, and is
    dropped when there are too few terms). :math:`c_0` is ignored. Rounding noise is
    dropped: coefficients below ``zero_tol`` times a neighbour within two orders (odd orders
    that vanish by symmetry, or every other one, so such series are handled), and those below
    ``floor`` times the largest :math:`|c_p|` unless they continue (within a factor 1e3) the
    decay fitted to the larger ones, as the accurate small terms of a fast series do.
    ``method="pade"``: modulus of the nearest pole of the diagonal Padé approximant (at most
    [20/20]) of the series rescaled by the root-test radius, with poles cancelled by a nearby
    zero discarded (Baker & Graves-Morris, *Padé Approximants*, 1996). The poles of a Padé
    approximant line up along the cut of a branch point, beginning just beyond it, so this
    estimate approaches the radius from above (about 1 % high for a square-root branch point
    with [20/20]); it is an independent cross-check of the root test.

    Returns ``np.inf`` for a terminating series: fewer than two non-zero coefficients with
    :math:`p \ge 1`, or all coefficients zero after the last non-zero one although the fitted
    decay says they should be resolvable (at least three such orders).

    Parameters
    ----------
    coefficients : array_like, shape (N,)
        :math:`c_0, c_1, \dots` (real or complex).
    method : {"root", "pade"}
    zero_tol, floor : float
        Noise thresholds described above.

    Returns
    -------
    float
        Estimated radius (Kato, *Perturbation Theory for Linear Operators*, 1966, ch. II:
        for an eigenvalue series it is the distance to the nearest exceptional point).
    """
    c = np.asarray(coefficients)
    if c.ndim != 1:
        raise ValueError("coefficients must be 1-D")
    if not np.all(np.isfinite(c)):
        raise ValueError("coefficients must be finite")
    if method not in ("root", "pade"):
        raise ValueError(f"unknown method {method!r}")
    mags = np.abs(c[1:]).astype(float)
    if mags.size == 0 or mags.max() == 0.0:
        return np.inf
    order = np.arange(1, c.size, dtype=float)
    structural = _structural_zeros(mags, zero_tol)
    keep = (mags > floor * mags.max()) & ~structural
    if keep.sum() < 2:
        return np.inf
    a, b, alpha = _tail_fit(order[keep], np.log(mags[keep]))
    last = int(order[keep][-1])
    after = np.arange(last + 1, c.size, dtype=float)
    with np.errstate(divide="ignore"):
        logm = np.log(mags)
    # below the floor, keep the terms that continue the fitted decay (accurate small terms of a
    # fast-converging series), not rounding noise or the zeros of a terminating series
    trend = a + b * order + alpha * np.log(order)
    extend = ~keep & ~structural & (order > last) & (np.abs(logm - trend) < np.log(1e3))
    if after.size >= 3 and not extend.any():
        predicted = a + b * after + alpha * np.log(after)
        if np.max(predicted) > np.log(1e4 * floor * mags.max()):
            return np.inf  # resolvable terms are missing: the series terminates
    if extend.any():
        keep = keep | extend
        a, b, alpha = _tail_fit(order[keep], logm[keep])
    root = float(np.exp(-b))
    if method == "root":
        return root
    return _pade_radius(c.astype(complex), root)


def level_convergence_radius(
    e0: ArrayLike,
    v: ArrayLike,
    index: int,
    max_order: int = 40,
    *,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
    method: str = "root",
    subspace: ArrayLike | None = None,
) -> float:
    r"""Convergence radius in λ of the perturbation series of one level of ``H0 + λV``.

    A non-degenerate level: :func:`convergence_radius` of its Rayleigh–Schrödinger energy
    coefficients (:func:`rs_energy_series`). The series converges at the physical point iff
    the radius exceeds 1; the radius is the distance to the nearest exceptional point of
    :math:`H(\lambda)` in the complex λ plane that involves this level (Kato 1966, ch. II).

    A level degenerate (within ``degeneracy_tol``) with others: its individual series need not
    exist, so the radius returned is that of the matrix series of the group's effective
    Hamiltonian, :math:`\sum_p \lambda^p H^{(p)}` (:func:`effective_hamiltonian_series`),
    estimated from the spectral norms :math:`\|H^{(p)}\|_2`. This is the radius of the
    quasi-degenerate (Löwdin) treatment used by :func:`perturbative_levels`; it is
    controlled by exceptional points that couple the group to the other levels, and does not
    include crossings among the group's own levels. For a group of one it is the RS result.

    Parameters
    ----------
    e0 : array_like, shape (n,)
    v : array_like, shape (n, n)
    index : int
    max_order : int
        Number of orders computed (the tail fit uses the upper two thirds).
    degeneracy_tol : float
    method : {"root", "pade"}
        See :func:`convergence_radius`.
    subspace : array_like of int, optional
        The group the level is treated in (e.g. from :func:`group_levels`, which also joins
        strongly coupled levels); default: the levels degenerate with it.

    Returns
    -------
    float
    """
    e, vv = _single(e0, v, 1.0)
    if not 0 <= index < e.size:
        raise ValueError(f"index {index} out of range for {e.size} levels")
    if subspace is None:
        group = np.flatnonzero(np.abs(e - e[index]) <= degeneracy_tol)
    else:
        group = np.unique(np.asarray(subspace, dtype=np.intp))
        if index not in group:
            raise ValueError("subspace must contain index")
    if group.size == 1:
        coeffs = rs_energy_series(e, vv, index, max_order, degeneracy_tol=degeneracy_tol)
        return convergence_radius(coeffs, method=method)
    series = effective_hamiltonian_series(
        e, vv, group, max_order, degeneracy_tol=degeneracy_tol
    )
    norms = np.array([np.linalg.norm(h, 2) for h in series])
    return convergence_radius(norms, method="root")
