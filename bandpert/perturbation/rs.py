"""Rayleigh–Schrödinger (RS) perturbation series for ``H(λ) = H0 + λ V``, ``H0 = diag(e0)``.

* The series of a single non-degenerate level to any order (:func:`rs_series`,
  :func:`rs_energy_series`, :func:`rs_state_series`).
* Batched RS corrections for many unperturbed spectra sharing one ``V`` (one spectrum per
  k-point): :func:`energy_corrections` (any order, the first four in closed form, Wigner's 2n+1
  rule) and :func:`second_order_shifts`.

References
----------
.. [SN] J. J. Sakurai and J. Napolitano, *Modern Quantum Mechanics*, 2nd ed., Addison-Wesley
   (2011), ch. 5 (time-independent perturbation theory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .common import (
    DEFAULT_DEGENERACY_TOL,
    FloatArray,
    Matvec,
    _as_coupling,
    _as_levels,
    _check_tolerances,
)

__all__ = [
    "RSSeries",
    "energy_corrections",
    "rs_energy_series",
    "rs_series",
    "rs_state_series",
    "second_order_shifts",
]


def _safe_reciprocal(d: NDArray, skip: NDArray) -> FloatArray:
    """``1/d`` where ``skip`` is False, 0 where it is True (never divides by a skipped entry)."""
    out = np.zeros(d.shape, dtype=float)
    np.divide(1.0, d, out=out, where=~skip)
    return out


def _overlap(x: NDArray, y: NDArray) -> FloatArray:
    """Real part of ``<x|y>`` along the last axis (``x`` conjugated)."""
    return np.real(np.einsum("...i,...i->...", x.conj(), y))


# --------------------------------------------------------------------------------------------
# Rayleigh–Schrödinger, single level
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class RSSeries:
    """Rayleigh–Schrödinger series of one level.

    Attributes
    ----------
    energies : ndarray, shape (max_order + 1,)
        ``E^(0), E^(1), ...``; the energy at coupling ``λ`` is ``Σ_k E^(k) λ^k``.
    states : ndarray, shape (max_order + 1, n)
        State corrections ``|ψ^(k)>`` in intermediate normalisation (``<n|ψ^(k)> = δ_k0``).
    """

    energies: FloatArray
    states: NDArray


def rs_series(
    e0: ArrayLike,
    v: ArrayLike,
    index: int,
    max_order: int,
    *,
    exclude: ArrayLike | None = None,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> RSSeries:
    r"""Rayleigh–Schrödinger energy and state series of one non-degenerate level.

    With intermediate normalisation and the reduced resolvent
    :math:`R = \sum_{m \ne n} |m\rangle\langle m| / (E_n^{(0)} - E_m^{(0)})` the recursion is

    .. math::

        E^{(k)} = \langle n|V|\psi^{(k-1)}\rangle, \qquad
        |\psi^{(k)}\rangle = R\Big[V|\psi^{(k-1)}\rangle
                             - \sum_{j=1}^{k} E^{(j)}|\psi^{(k-j)}\rangle\Big],

    starting from :math:`|\psi^{(0)}\rangle = |n\rangle` (Sakurai & Napolitano, *Modern Quantum
    Mechanics*, ch. 5). Each order costs one matrix-vector product.

    Parameters
    ----------
    e0 : array_like, shape (n,)
        Unperturbed energies (diagonal of ``H0``).
    v : array_like, shape (n, n)
        Hermitian perturbation; the series is in powers of its prefactor ``λ``.
    index : int
        Level ``n`` to expand.
    max_order : int
        Highest order ``k`` computed (``>= 0``).
    exclude : array_like of int, optional
        Further basis states left out of ``R`` (their terms are dropped). Used to expand one
        member of a group whose other members are treated elsewhere; a level degenerate with
        ``index`` must then be excluded.
    degeneracy_tol : float
        Absolute tolerance on ``|e0[m] - e0[index]|`` for "degenerate".

    Returns
    -------
    RSSeries
        ``energies`` (max_order + 1,) and ``states`` (max_order + 1, n).

    Raises
    ------
    ValueError
        If a level that is not excluded lies within ``degeneracy_tol`` of level ``index``: the
        non-degenerate series does not exist then; use :func:`lowdin_effective_hamiltonian`.
    """
    e = _as_levels(e0)
    if e.ndim != 1:
        raise ValueError("rs_series expects a single spectrum e0 of shape (n,)")
    n = e.size
    vv = _as_coupling(v, n, None, 1.0)
    _check_tolerances(degeneracy_tol)
    if not 0 <= index < n:
        raise ValueError(f"index {index} out of range for {n} levels")
    if max_order < 0:
        raise ValueError("max_order must be >= 0")
    skip = np.zeros(n, dtype=bool)
    skip[index] = True
    if exclude is not None:
        skip[np.asarray(exclude, dtype=int)] = True
    d = e[index] - e
    clash = np.flatnonzero(~skip & (np.abs(d) <= degeneracy_tol))
    if clash.size:
        raise ValueError(
            f"level {index} (e0 = {e[index]!r}) is degenerate within {degeneracy_tol:g} with "
            f"level(s) {clash.tolist()}; use lowdin_effective_hamiltonian for the group"
        )
    dinv = _safe_reciprocal(d, skip)
    dtype = np.result_type(vv.dtype, float)
    psi = np.zeros((max_order + 1, n), dtype=dtype)
    psi[0, index] = 1.0
    energies = np.zeros(max_order + 1)
    energies[0] = e[index]
    for k in range(1, max_order + 1):
        energies[k] = np.real(vv[index] @ psi[k - 1])
        # sum_{j=1..k} E^(j) psi^(k-j); the j = k term is annihilated by R but kept for clarity
        mixed = np.einsum("j,jn->n", energies[1 : k + 1], psi[k - 1 :: -1][:k])
        psi[k] = dinv * (vv @ psi[k - 1] - mixed)
    return RSSeries(energies=energies, states=psi)


def rs_energy_series(
    e0: ArrayLike,
    v: ArrayLike,
    index: int,
    max_order: int,
    *,
    exclude: ArrayLike | None = None,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> FloatArray:
    r"""Rayleigh–Schrödinger energy coefficients :math:`E^{(0)}, \dots, E^{(k_{max})}`.

    Thin wrapper of :func:`rs_series` (same recursion, same parameters):
    :math:`E^{(k)} = \langle n|V|\psi^{(k-1)}\rangle` (Sakurai & Napolitano, ch. 5).

    Returns
    -------
    ndarray, shape (max_order + 1,)
        ``E(λ) = Σ_k E^(k) λ^k``.
    """
    return rs_series(
        e0, v, index, max_order, exclude=exclude, degeneracy_tol=degeneracy_tol
    ).energies


def rs_state_series(
    e0: ArrayLike,
    v: ArrayLike,
    index: int,
    max_order: int,
    *,
    exclude: ArrayLike | None = None,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> NDArray:
    r"""Rayleigh–Schrödinger state corrections :math:`|\psi^{(k)}\rangle`, k = 0..max_order.

    Intermediate normalisation, :math:`\langle n|\psi^{(k)}\rangle = \delta_{k0}`;
    :math:`|\psi^{(k)}\rangle = R[V|\psi^{(k-1)}\rangle - \sum_{j=1}^{k} E^{(j)}
    |\psi^{(k-j)}\rangle]` (Sakurai & Napolitano, ch. 5). See :func:`rs_series`.

    Returns
    -------
    ndarray, shape (max_order + 1, n)
    """
    return rs_series(
        e0, v, index, max_order, exclude=exclude, degeneracy_tol=degeneracy_tol
    ).states


# --------------------------------------------------------------------------------------------
# Rayleigh–Schrödinger, batched (Wigner's 2n+1 rule)
# --------------------------------------------------------------------------------------------


def _rs_core(
    dinv: FloatArray,
    vcol: NDArray,
    vdiag: FloatArray,
    matvec: Matvec,
    max_order: int,
    vpsi1: NDArray | None = None,
    psi1: NDArray | None = None,
) -> FloatArray:
    r"""Energy corrections E^(1..max_order) for a batch of levels (E^(0) entry left 0).

    ``dinv[..., m]`` is the reduced resolvent ``1/(e_n - e_m)`` (0 for excluded m, including n),
    ``vcol[..., m] = V_mn``, ``vdiag = V_nn`` and ``matvec`` applies ``V`` along the last axis.
    Uses the 2n+1 form of the recursion (intermediate normalisation):

        E^(2k)   = <ψ^(k-1)|V|ψ^(k)> - Σ_{i=1..k} Σ_{j=1..k-1} E^(2k-i-j) <ψ^(i)|ψ^(j)>
        E^(2k+1) = <ψ^(k)|V|ψ^(k)>   - Σ_{i=1..k} Σ_{j=1..k}   E^(2k+1-i-j) <ψ^(i)|ψ^(j)>

    so that ``m`` products with ``V`` give the energy through order ``2m + 2``. ``vpsi1`` and
    ``psi1`` optionally supply V|ψ^(1)> and |ψ^(1)> when the caller has them already.
    """
    shape = dinv.shape[:-1]
    out = np.zeros((max_order + 1, *shape))
    if max_order == 0:
        return out
    out[1] = vdiag
    psi: list[NDArray] = [vcol]  # psi[0] unused (the unit vector), placeholder keeps indices
    vpsi: list[NDArray] = [vcol]  # V|ψ^(j)>, j = 0, 1, ...
    gram: dict[tuple[int, int], FloatArray] = {}

    def g(i: int, j: int) -> FloatArray:
        return gram[(min(i, j), max(i, j))]

    k = 1
    while 2 * k <= max_order:
        acc = vpsi[k - 1]
        for j in range(1, k):
            acc = acc - out[j][..., None] * psi[k - j]
        psik = psi1 if (k == 1 and psi1 is not None) else dinv * acc
        psi.append(psik)
        # <ψ^(k)|ψ^(k)> enters only E^(2k+1)
        for i in range(1, k + 1 if 2 * k + 1 <= max_order else k):
            gram[(i, k)] = _overlap(psi[i], psik)
        energy = _overlap(vpsi[k - 1], psik)
        for i in range(1, k + 1):
            for j in range(1, k):
                energy = energy - out[2 * k - i - j] * g(i, j)
        out[2 * k] = energy
        if 2 * k + 1 <= max_order:
            vk = vpsi1 if (k == 1 and vpsi1 is not None) else matvec(psik)
            vpsi.append(vk)
            energy = _overlap(psik, vk)
            for i in range(1, k + 1):
                for j in range(1, k + 1):
                    energy = energy - out[2 * k + 1 - i - j] * g(i, j)
            out[2 * k + 1] = energy
        k += 1
    return out


def _batch_targets(targets: ArrayLike | None, n_k: int, n: int) -> NDArray[np.intp]:
    if targets is None:
        return np.broadcast_to(np.arange(n), (n_k, n))
    t = np.asarray(targets)
    if not np.issubdtype(t.dtype, np.integer):
        raise ValueError("targets must be integer level indices")
    if t.ndim == 1:
        t = np.broadcast_to(t, (n_k, t.size))
    if t.ndim != 2 or t.shape[0] != n_k:
        raise ValueError(f"targets must have shape (n_t,) or ({n_k}, n_t), got {t.shape}")
    if t.size and (t.min() < 0 or t.max() >= n):
        raise ValueError(f"targets out of range for {n} levels")
    return t.astype(np.intp)


def _columns(vv: NDArray, targets: NDArray[np.intp]) -> tuple[NDArray, NDArray]:
    """Columns ``V[:, t]`` as rows, shape (n_k, n_t, n), and the transposed V for matvecs."""
    if vv.ndim == 2:
        vt = vv.T
        return vt[targets], vt
    vt = np.swapaxes(vv, 1, 2)
    return vt[np.arange(vv.shape[0])[:, None], targets], vt


def energy_corrections(
    e0: ArrayLike,
    v: ArrayLike,
    max_order: int = 4,
    *,
    targets: ArrayLike | None = None,
    exclude: ArrayLike | None = None,
    lam: float = 1.0,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> FloatArray:
    r"""Batched Rayleigh–Schrödinger energy terms for many spectra sharing one perturbation.

    For each batch row ``k`` (unperturbed spectrum ``e0[k]``) and target level ``n``, with
    :math:`d_m = e_n - e_m`, the resolvent weights :math:`r_m = 1/d_m` (0 for ``m = n`` and for
    excluded ``m``), :math:`a = R V|n\rangle` (so :math:`a_m = V_{mn} r_m`) and
    :math:`c = V a`, the first four orders are the closed forms

    .. math::

        E^{(1)} &= V_{nn}, \qquad E^{(2)} = \sum_m |V_{mn}|^2 r_m, \\
        E^{(3)} &= \sum_{m,l} V_{nm}V_{ml}V_{ln}\, r_m r_l - V_{nn}\sum_m |V_{nm}|^2 r_m^2
                  = a^\dagger c - E^{(1)} a^\dagger a, \\
        E^{(4)} &= \sum_m r_m |c_m - E^{(1)} a_m|^2 - E^{(2)}\, a^\dagger a ,

    (Sakurai & Napolitano, ch. 5; the last two follow from Wigner's 2n+1 rule, see e.g.
    Hirschfelder, Byers Brown & Epstein, Adv. Quantum Chem. 1, 255 (1964), from memory).
    Higher orders use the general 2n+1 formulas, so ``m`` matrix products with ``V`` (one GEMM
    over the whole batch each) give all orders up to ``2m + 2``.

    Parameters
    ----------
    e0 : array_like, shape (n_k, n) or (n,)
        Unperturbed spectra, one per batch row.
    v : array_like, shape (n, n) or (n_k, n, n)
        Hermitian perturbation, shared by all rows or one per row.
    max_order : int
        Highest order returned.
    targets : array_like of int, shape (n_t,) or (n_k, n_t), optional
        Levels to expand in each row (default: all levels).
    exclude : array_like of bool, optional
        Mask broadcastable to (n_k, n_t, n): True drops level ``m`` from the sums of target
        ``t`` (e.g. the other members of ``t``'s subspace group). The target itself is always
        dropped.
    lam : float
        Coupling ``λ``; the terms are returned evaluated at it, i.e. ``λ^k E^(k)``.
    degeneracy_tol : float
        A non-excluded ``m`` with ``|e_n - e_m| <= degeneracy_tol`` is an error.

    Returns
    -------
    ndarray, shape (max_order + 1, n_k, n_t), or (max_order + 1, n_t) for 1-D ``e0``
        Entry ``[0]`` is ``e0`` of the targets, entry ``[k]`` the order-``k`` term.

    Raises
    ------
    ValueError
        If a near-zero denominator is not masked by ``exclude``.
    """
    e = _as_levels(e0)
    batched = e.ndim == 2
    e2 = np.atleast_2d(e)
    n_k, n = e2.shape
    vv = _as_coupling(v, n, n_k if batched else None, lam)
    _check_tolerances(degeneracy_tol)
    if max_order < 0:
        raise ValueError("max_order must be >= 0")
    tg = _batch_targets(targets, n_k, n)
    n_t = tg.shape[1]
    excl = None
    if exclude is not None:
        excl = np.broadcast_to(np.asarray(exclude, dtype=bool), (n_k, n_t, n))
    out = np.empty((max_order + 1, n_k, n_t))
    chunk = max(1, 2_000_000 // max(1, n_t * n))
    for start in range(0, n_k, chunk):
        sl = slice(start, min(n_k, start + chunk))
        tk, ek = tg[sl], e2[sl]
        skip = np.zeros((ek.shape[0], n_t, n), dtype=bool)
        if excl is not None:
            skip |= excl[sl]
        np.put_along_axis(skip, tk[..., None], True, axis=2)
        et = np.take_along_axis(ek, tk, axis=1)
        d = et[..., None] - ek[:, None, :]
        bad = ~skip & (np.abs(d) <= degeneracy_tol)
        if bad.any():
            k, t, m = np.argwhere(bad)[0]
            raise ValueError(
                f"row {start + k}: target level {tk[k, t]} and level {m} are degenerate "
                f"within {degeneracy_tol:g} but level {m} is not excluded; group them "
                "(group_levels) and use the subspace treatment"
            )
        dinv = _safe_reciprocal(d, skip)
        vcol, vt = _columns(vv if vv.ndim == 2 else vv[sl], tk)
        vdiag = np.real(np.take_along_axis(vcol, tk[..., None], axis=2)[..., 0])
        out[:, sl] = _rs_core(dinv, vcol, vdiag, lambda x, vt=vt: x @ vt, max_order)
        out[0, sl] = et
    return out if batched else out[:, 0, :]


def second_order_shifts(
    e0: ArrayLike,
    v: ArrayLike,
    *,
    targets: ArrayLike | None = None,
    exclude: ArrayLike | None = None,
    lam: float = 1.0,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> tuple[FloatArray, FloatArray]:
    r"""First- and second-order shifts, batched over spectra that share ``V``.

    .. math::

        E^{(1)}_n = \lambda V_{nn}, \qquad
        E^{(2)}_n = \lambda^2 \sum_{m \notin G_n} \frac{|V_{mn}|^2}{e_n - e_m},

    where :math:`G_n` is ``n`` plus the levels masked by ``exclude`` (Sakurai & Napolitano,
    ch. 5). Parameters as in :func:`energy_corrections` (which also gives orders 3 and 4).

    Returns
    -------
    first, second : ndarray, shape (n_k, n_t) or (n_t,)
    """
    terms = energy_corrections(
        e0, v, 2, targets=targets, exclude=exclude, lam=lam, degeneracy_tol=degeneracy_tol
    )
    return terms[1], terms[2]
