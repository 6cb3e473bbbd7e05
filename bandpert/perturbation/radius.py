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

__all__ = ["BRANCH_EXPONENT", "RADIUS_AGREEMENT", "convergence_radius", "level_convergence_radius"]


#: Exponent of the power-law prefactor of the coefficients, ``c_p ~ p^α r^-p``. A generic
#: exceptional point is a square-root branch point, ``E(λ) ≈ E* + a (λ - λ*)^(1/2)``, whose
#: Taylor coefficients about 0 fall as ``p^(-3/2) |λ*|^-p`` (Darboux's method; P. Flajolet and
#: R. Sedgewick, *Analytic Combinatorics*, Cambridge 2009, Thm. VI.1). Fixed, not fitted: a
#: free ``α log p`` term is nearly collinear with ``p`` over p = 10-30 and made the old fit
#: unstable.
BRANCH_EXPONENT: float = -1.5

#: Largest ratio between the root-test and the conjugate-pair estimates for which the radius is
#: reported; beyond it the radius is undetermined (NaN). On 400 random 8x8 problems (30 orders)
#: the ratio has median 1.016 and maximum 1.19, and the pair estimate is within 9.4 % of the
#: true radius on all of them (tests/test_perturbation_radius.py).
RADIUS_AGREEMENT: float = 1.25

#: Relative size below which a Hankel determinant ``c_p c_{p+2} - c_{p+1}^2`` is cancellation.
_HANKEL_CANCEL = 1e-10


def _structural_zeros(mags: FloatArray, zero_tol: float) -> NDArray[np.bool_]:
    """Coefficients that are rounding noise next to much larger neighbours (within 2 orders)."""
    padded = np.pad(mags, 2)
    neigh = np.max(np.stack([padded[s : s + mags.size] for s in (0, 1, 3, 4)]), axis=0)
    return mags <= zero_tol * neigh


def _upper_two_thirds(p: FloatArray) -> NDArray[np.bool_]:
    tail = p >= p[0] + (p[-1] - p[0]) / 3.0
    return tail if tail.sum() >= 2 else np.ones(p.size, dtype=bool)


def _line_fit(p: FloatArray, y: FloatArray) -> tuple[float, float]:
    """Least-squares ``y = a + b p`` over the upper two thirds of the points; (a, b)."""
    tail = _upper_two_thirds(p)
    b, a = np.polyfit(p[tail], y[tail], 1)
    return float(a), float(b)


def _usable_terms(mags: FloatArray, order: FloatArray, zero_tol: float,
                  floor: float) -> tuple[NDArray[np.bool_], NDArray[np.bool_]] | None:
    """Masks (kept, structural zero) of the coefficients to fit; None for a terminating series.

    Structural zeros are rounding noise next to much larger neighbours (odd orders that vanish
    by symmetry). Coefficients below ``floor`` times the largest are kept only where they
    continue (within a factor 1e3) the decay fitted to the larger ones, as the accurate small
    terms of a fast series do; if none does although the decay says at least three further
    terms should be resolvable, the series terminates.
    """
    structural = _structural_zeros(mags, zero_tol)
    keep = (mags > floor * mags.max()) & ~structural
    if keep.sum() < 2:
        return None
    with np.errstate(divide="ignore"):
        logm = np.log(mags)
    shift = BRANCH_EXPONENT * np.log(order)
    a, b = _line_fit(order[keep], logm[keep] - shift[keep])
    last = int(order[keep][-1])
    after = order > last
    trend = a + b * order + shift
    extend = ~keep & ~structural & after & (np.abs(logm - trend) < np.log(1e3))
    if after.sum() >= 3 and not extend.any():
        if np.max(trend[after]) > np.log(1e4 * floor * mags.max()):
            return None
    return keep | extend, structural


def _root_radius(mags: FloatArray, order: FloatArray, keep: NDArray[np.bool_]) -> float:
    """Root test: ``log|c_p| - α log p = a - p log R`` by least squares over the tail."""
    _, b = _line_fit(order[keep], np.log(mags[keep]) - BRANCH_EXPONENT * np.log(order[keep]))
    return float(np.exp(-b))


def _pair_radius(c: NDArray, order: FloatArray, keep: NDArray[np.bool_],
                 structural: NDArray[np.bool_]) -> float:
    """Conjugate-pair estimate from the Hankel determinants ``D_p = c_p c_{p+2} - c_{p+1}^2``.

    For ``c_p = A p^α r^-p cos(pθ + φ)`` (a complex-conjugate pair of branch points at
    ``r e^{±iθ}``) the oscillation cancels: ``D_p ≈ -A² p^{2α} r^{-2p-2} sin²θ``, so
    ``log|D_p| - 2α log p = a - 2p log r`` is a straight line whatever θ and φ (Hadamard's
    theorem on Hankel determinants; P. Henrici, *Applied and Computational Complex Analysis*,
    vol. 1, Wiley 1974, §7.5, from memory). Where all ``D_p`` cancel (a rank-one sequence, a
    single pole) the ratio of successive terms is used instead.
    """
    cc = np.where(structural, 0.0, c)
    use = keep | structural
    valid = use[:-2] & use[1:-1] & use[2:]
    d = cc[:-2] * cc[2:] - cc[1:-1] ** 2
    scale = np.maximum(np.abs(cc[:-2] * cc[2:]), np.abs(cc[1:-1]) ** 2)
    ok = valid & (np.abs(d) > _HANKEL_CANCEL * scale) & (scale > 0)
    if ok.sum() >= 3:
        p = order[:-2][ok]
        _, b = _line_fit(p, np.log(np.abs(d[ok])) - 2 * BRANCH_EXPONENT * np.log(p))
        return float(np.exp(-b / 2))
    _, b = _line_fit(order[keep], np.log(np.abs(c[keep])))
    return float(np.exp(-b))


def _checked(root: float, pair: float, agreement: float) -> float:
    """The pair estimate where it agrees with the root test within ``agreement``, else NaN."""
    if not (np.isfinite(root) and np.isfinite(pair)) or root <= 0 or pair <= 0:
        return np.nan
    return pair if max(root / pair, pair / root) <= agreement else np.nan


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
    method: str = "checked",
    zero_tol: float = 1e-9,
    floor: float = 1e-13,
    agreement: float = RADIUS_AGREEMENT,
) -> float:
    r"""Radius of convergence in λ of :math:`\sum_p c_p \lambda^p` from finitely many terms.

    Two estimators, both fitted over the upper two thirds of the usable orders
    :math:`p \ge 1` (:math:`c_0` is ignored):

    * root test (``method="root"``): Cauchy–Hadamard, :math:`R = 1/\limsup |c_p|^{1/p}`, as
      the least-squares line :math:`\log|c_p| + \tfrac32 \log p = a - p \log R`. The
      :math:`p^{-3/2}` prefactor of a square-root branch point (a generic exceptional point)
      is fixed, not fitted (:data:`BRANCH_EXPONENT`). Stable, but where the nearest
      singularities are a complex-conjugate pair :math:`r e^{\pm i\theta}` the terms
      oscillate as :math:`\cos(p\theta + \phi)` and the dips bias it;
    * conjugate pair (``method="pair"``): the line through
      :math:`\log|c_p c_{p+2} - c_{p+1}^2| + 3\log p = a - 2p\log R`, in which that
      oscillation cancels exactly (see :func:`_pair_radius`; Hadamard's theorem on Hankel
      determinants, Henrici 1974, §7.5).

    ``method="checked"`` (default) returns the conjugate-pair value when the two agree within
    the factor ``agreement`` and NaN (undetermined) otherwise: a radius is either right or
    says it does not know. For a Hermitian problem :math:`H_0 + \lambda V` the exceptional
    points come in complex-conjugate pairs, so the pair estimate is the apt one and the root
    test is its independent check. ``method="pade"``: modulus of the nearest pole of the
    diagonal Padé approximant (at most [20/20]) of the series rescaled by the root-test radius,
    poles cancelled by a nearby zero discarded (Baker & Graves-Morris, *Padé Approximants*,
    1996); its poles line up along the cut of a branch point, starting just beyond it.

    Rounding noise is dropped before fitting: coefficients below ``zero_tol`` times a neighbour
    within two orders (odd orders that vanish by symmetry), and those below ``floor`` times the
    largest :math:`|c_p|` unless they continue (within a factor 1e3) the fitted decay, as the
    accurate small terms of a fast series do. Returns ``np.inf`` for a terminating series:
    fewer than two non-zero coefficients with :math:`p \ge 1`, or all coefficients zero after
    the last non-zero one although the fitted decay says they should be resolvable (at least
    three such orders).

    Parameters
    ----------
    coefficients : array_like, shape (N,)
        :math:`c_0, c_1, \dots` (real or complex).
    method : {"checked", "root", "pair", "pade"}
    zero_tol, floor : float
        Noise thresholds described above.
    agreement : float
        Largest ratio of the two estimates accepted by ``method="checked"``.

    Returns
    -------
    float
        Estimated radius, ``inf`` for a terminating series, NaN if undetermined (Kato,
        *Perturbation Theory for Linear Operators*, 1966, ch. II: for an eigenvalue series it
        is the distance to the nearest exceptional point on the level's branch).
    """
    c = np.asarray(coefficients)
    if c.ndim != 1:
        raise ValueError("coefficients must be 1-D")
    if not np.all(np.isfinite(c)):
        raise ValueError("coefficients must be finite")
    if method not in ("checked", "root", "pair", "pade"):
        raise ValueError(f"unknown method {method!r}")
    if not agreement >= 1.0:
        raise ValueError(f"agreement must be >= 1, got {agreement}")
    mags = np.abs(c[1:]).astype(float)
    if mags.size == 0 or mags.max() == 0.0:
        return np.inf
    order = np.arange(1, c.size, dtype=float)
    usable = _usable_terms(mags, order, zero_tol, floor)
    if usable is None:
        return np.inf
    keep, structural = usable
    root = _root_radius(mags, order, keep)
    if method == "root":
        return root
    if method == "pade":
        return _pade_radius(c.astype(complex), root)
    pair = _pair_radius(c[1:], order, keep, structural)
    return pair if method == "pair" else _checked(root, pair, agreement)


def level_convergence_radius(
    e0: ArrayLike,
    v: ArrayLike,
    index: int,
    max_order: int = 30,
    *,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
    method: str = "checked",
    subspace: ArrayLike | None = None,
    agreement: float = RADIUS_AGREEMENT,
) -> float:
    r"""Convergence radius in λ of the perturbation series of one level of ``H0 + λV``.

    A non-degenerate level: :func:`convergence_radius` of its Rayleigh–Schrödinger energy
    coefficients (:func:`rs_energy_series`). The series converges at the physical point iff
    the radius exceeds 1; the radius is the modulus of the nearest exceptional point of
    :math:`H(\lambda)` in the complex λ plane at which the branch continued from this level
    meets another (Kato 1966, ch. II). NaN when the two estimators disagree (undetermined).

    A level degenerate (within ``degeneracy_tol``) with others: its individual series need not
    exist, so the radius returned is that of the matrix series of the group's effective
    Hamiltonian, :math:`\sum_p \lambda^p H^{(p)}` (:func:`effective_hamiltonian_series`),
    estimated by the root test on the spectral norms :math:`\|H^{(p)}\|_2`, checked by the
    conjugate-pair estimate on the trace :math:`\mathrm{tr}\,H^{(p)}` (NaN if they disagree
    by more than ``agreement``). This is the radius of the quasi-degenerate (Löwdin) treatment
    used by :func:`perturbative_levels`: the nearest λ at which a level of the group meets a
    level outside it (Kato 1966, ch. II: the group's spectral projector is analytic until
    then); crossings among the group's own levels do not limit it. For a group of one it is the
    RS result.

    Parameters
    ----------
    e0 : array_like, shape (n,)
    v : array_like, shape (n, n)
    index : int
    max_order : int
        Number of orders computed (the tail fit uses the upper two thirds).
    degeneracy_tol : float
    method : {"checked", "root", "pair", "pade"}
        See :func:`convergence_radius` ("pade" for a single level only).
    subspace : array_like of int, optional
        The group the level is treated in (e.g. from :func:`group_levels`, which also joins
        strongly coupled levels); default: the levels degenerate with it.
    agreement : float
        See :func:`convergence_radius`.

    Returns
    -------
    float
        Radius; ``inf`` for a terminating series, NaN if undetermined.
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
        return convergence_radius(coeffs, method=method, agreement=agreement)
    if method == "pade":
        raise ValueError("method 'pade' needs a single level, not a group")
    series = effective_hamiltonian_series(
        e, vv, group, max_order, degeneracy_tol=degeneracy_tol
    )
    norms = np.array([np.linalg.norm(h, 2) for h in series])
    root = convergence_radius(norms, method="root")
    if method == "root" or not np.isfinite(root):
        return root
    trace = np.real(np.trace(series, axis1=1, axis2=2))
    pair = convergence_radius(trace, method="pair")
    if not np.isfinite(pair):  # the trace may terminate (e.g. a traceless coupling)
        pair = convergence_radius(np.real(series[:, 0, 0]), method="pair")
    return pair if method == "pair" else _checked(root, pair, agreement)
