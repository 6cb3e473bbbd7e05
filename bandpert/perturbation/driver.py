"""The batched perturbative driver: chooses the treatment per level, estimates the error.

:func:`perturbative_levels` returns the lowest levels of many spectra ``e0[k]`` sharing one
perturbation ``V`` (one spectrum per k-point): Rayleigh–Schrödinger series (:mod:`.rs`) for
isolated levels, Löwdin effective Hamiltonians (:mod:`.lowdin`) for the groups found by
:mod:`.grouping`, with an estimate of the truncation error.

References
----------
.. [L51] P.-O. Löwdin, J. Chem. Phys. 19, 1396 (1951) (partitioning).
.. [W03] R. Winkler, *Spin-Orbit Coupling Effects in Two-Dimensional Electron and Hole Systems*,
   Springer (2003), App. B.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .common import (
    DEFAULT_DEGENERACY_TOL,
    FloatArray,
    _as_coupling,
    _as_levels,
    _check_tolerances,
)
from .grouping import DEFAULT_COUPLING_THRESHOLD, _grow_groups, _indirect_join, _links
from .lowdin import _heff_batch
from .rs import _columns, _rs_core

__all__ = [
    "DEFAULT_MAX_SUBSPACE",
    "TREATMENT_NAMES",
    "TREATMENT_NONDEGENERATE",
    "TREATMENT_SUBSPACE",
    "PerturbedLevels",
    "perturbative_levels",
    "threshold_ladder",
]

#: Default cap on the levels held by the groups of one row (see ``perturbative_levels``).
DEFAULT_MAX_SUBSPACE: int = 48

#: Numbers per (rows × targets × levels) array the batched driver holds at once. Smaller chunks
#: stay in cache: on the benchmark machine 2.5e5 is 10-20 % faster than 2e6 (aluminium and
#: silicon, 200 k-points), and memory stops growing with the number of rows beyond it.
DRIVER_CHUNK_NUMBERS: int = 250_000

#: Thresholds tried, in order, when the groups of a row outgrow ``max_subspace``.
THRESHOLD_LADDER_STEPS: tuple[float, ...] = (0.25, 0.45)

TREATMENT_NONDEGENERATE: int = 0
TREATMENT_SUBSPACE: int = 1
TREATMENT_NAMES: tuple[str, str] = ("non-degenerate", "subspace")


@dataclass(frozen=True, eq=False)
class PerturbedLevels:
    """Perturbative levels, sorted ascending per batch row.

    All arrays have shape (n_k, n_levels), or (n_levels,) for an unbatched call, and are in
    the same (sorted-by-energy) order.

    Attributes
    ----------
    energies : ndarray of float
        Perturbative energies at the requested order.
    treatment : ndarray of int8
        ``TREATMENT_NONDEGENERATE`` (0, Rayleigh–Schrödinger) or ``TREATMENT_SUBSPACE``
        (1, Löwdin effective Hamiltonian); names in ``TREATMENT_NAMES``.
    max_coupling_ratio : ndarray of float
        Largest ``|λ V_mn| / |e_n - e_m|`` from the level (for a subspace: from any member of
        its group) to any level outside its group.
    error_estimate : ndarray of float
        Size of the next two orders, see :func:`perturbative_levels`.
    group_size : ndarray of int
        Number of unperturbed levels in the level's group (1 for non-degenerate treatment).
    origin : ndarray of int
        Index (into the row of ``e0``) of the unperturbed level a result comes from; for a
        subspace result, the lowest-index member of its group.
    threshold : ndarray of float, shape (n_k,) (a float for an unbatched call)
        Coupling threshold actually used per row (see ``max_subspace`` of
        :func:`perturbative_levels`).
    order : int
        Perturbation order used.
    """

    energies: FloatArray
    treatment: NDArray[np.int8]
    max_coupling_ratio: FloatArray
    error_estimate: FloatArray
    group_size: NDArray[np.intp]
    origin: NDArray[np.intp]
    threshold: FloatArray
    order: int


def perturbative_levels(
    e0: ArrayLike,
    v: ArrayLike,
    n_levels: int,
    lam: float = 1.0,
    order: int = 2,
    coupling_threshold: float = DEFAULT_COUPLING_THRESHOLD,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
    *,
    buffer_levels: int = 2,
    indirect: bool = True,
    estimate_error: bool = True,
    chunk_size: int | None = None,
    max_subspace: int | None = DEFAULT_MAX_SUBSPACE,
) -> PerturbedLevels:
    r"""Lowest perturbative levels of many spectra sharing one perturbation.

    For every batch row (e.g. k-point):

    1. The targets are the ``n_levels + buffer_levels`` lowest unperturbed levels. The buffer
       lets a level that starts just above the window but is pushed below it be found; the
       results are sorted and only the ``n_levels`` lowest are returned.
    2. Levels are grouped as in :func:`group_levels` (only groups containing targets are
       built; a group may pull in levels from outside the window).
    3. A target alone in its group gets the Rayleigh–Schrödinger series
       :math:`E = e_n + \sum_{k=1}^{p} E^{(k)}`, vectorised over the batch
       (:func:`energy_corrections`, one matrix product with ``V`` per two orders). A larger
       group gets the eigenvalues of its Hermitian effective Hamiltonian
       :math:`\sum_{k \le p} H^{(k)}` (Löwdin, J. Chem. Phys. 19, 1396 (1951); Winkler 2003,
       App. B; computed by :func:`effective_hamiltonian_series`); all its eigenvalues compete
       for the ``n_levels`` lowest places. Groups are found for all rows at once (breadth
       first search plus label propagation) and the effective Hamiltonians of all groups of
       equal size are built together, so the only Python loops run over perturbation orders
       and over the distinct group sizes.

    Error estimate. With :math:`t_j = \|H^{(j)}\|_2` the spectral norm of the order-``j``
    effective-Hamiltonian term (for a non-degenerate level :math:`t_j = |E^{(j)}|`),

    .. math::

        \varepsilon = \frac{t_{p+1} + t_{p+2}}{1 - \rho}, \qquad
        \rho = \min\Big(0.9, \sqrt{t_{q+2}/t_q}\Big), \quad q = \max(p, 2).

    Two terms are used because at symmetric points the odd orders often vanish (a cosine
    lattice at k = 0), where the next term alone would claim an exact result; the factor
    :math:`1/(1-\rho)` sums a geometric tail with the per-order ratio ρ measured over two
    orders (again immune to vanishing odd orders; orders 0 and 1 are left out of ρ because
    they are the unperturbed energy and the diagonal of ``V``). By Weyl's inequality the
    spectral norm bounds the shift of every eigenvalue of a group caused by adding those
    terms. It is an estimate, not a rigorous bound: slowly converging series with many
    same-sign terms can exceed it; the tests require it to cover the true error on at least
    90 % of levels of random weak problems (it covers 96-100 % there, over-estimating by a
    median factor 2-9 depending on the order). Computing it costs one product with ``V``
    per target (orders 3 and 4 of a non-degenerate level, by the 2n+1 rule) and two per
    group member (Löwdin orders 3 and 4); ``estimate_error=False`` skips it.

    Parameters
    ----------
    e0 : array_like, shape (n_k, n) or (n,)
        Unperturbed energies per row.
    v : array_like, shape (n, n) or (n_k, n, n)
        Hermitian perturbation, shared or per row.
    n_levels : int
        Number of lowest levels returned per row.
    lam : float
        Coupling ``λ`` (1 is the physical case).
    order : int
        Perturbation order ``p >= 0``.
    coupling_threshold, degeneracy_tol : float
        Grouping parameters, see :func:`group_levels`.
    buffer_levels : int
        Extra levels computed above the window and dropped after sorting.
    indirect : bool
        Use the second-order grouping rule of :func:`group_levels`.
    estimate_error : bool
        Compute the error estimate (default). With False the series stop at order ``p``,
        ``error_estimate`` is NaN, and at ``p = 2`` with ``indirect=False`` no product with
        ``V`` is needed at all (the fastest mode).
    max_subspace : int or None
        Largest number of unperturbed levels the groups of one row may hold together. A
        subspace that grows to a large part of the basis is no longer perturbation theory (it
        is exact diagonalisation of a big block, and slower): where a row's groups would exceed
        this, the row is redone with the threshold raised along :func:`threshold_ladder`
        (the last step is not capped). The threshold used per row is returned. ``None``
        disables the cap.
    chunk_size : int, optional
        Rows processed at once (memory ~ chunk * (n_levels + buffer) * n numbers; default
        keeps it near :data:`DRIVER_CHUNK_NUMBERS`).

    Returns
    -------
    PerturbedLevels
    """
    e = _as_levels(e0)
    batched = e.ndim == 2
    e2 = np.atleast_2d(e)
    n_k, n = e2.shape
    vv = _as_coupling(v, n, n_k if batched else None, lam)
    _check_tolerances(degeneracy_tol, coupling_threshold)
    if not 1 <= n_levels <= n:
        raise ValueError(f"n_levels must be between 1 and {n}, got {n_levels}")
    if order < 0:
        raise ValueError("order must be >= 0")
    if buffer_levels < 0:
        raise ValueError("buffer_levels must be >= 0")
    n_t = min(n, n_levels + buffer_levels)
    energies = np.empty((n_k, n_levels))
    treatment = np.empty((n_k, n_levels), dtype=np.int8)
    ratio = np.empty((n_k, n_levels))
    error = np.empty((n_k, n_levels))
    gsize = np.empty((n_k, n_levels), dtype=np.intp)
    origin = np.empty((n_k, n_levels), dtype=np.intp)
    outs = (energies, treatment, ratio, error, gsize, origin)
    chunk = chunk_size or max(1, DRIVER_CHUNK_NUMBERS // (n_t * n))
    ladder = threshold_ladder(coupling_threshold) if max_subspace else [coupling_threshold]
    used = np.empty(n_k)

    def run(rows: NDArray[np.intp], thr: float, cap: int | None) -> NDArray[np.intp]:
        part = tuple(np.empty((rows.size, n_levels), dtype=o.dtype) for o in outs)
        over = _driver_chunk(
            e2[rows], vv if vv.ndim == 2 else vv[rows], n_levels, n_t, order, thr,
            degeneracy_tol, indirect, estimate_error, part, cap,
        )
        for o, q in zip(outs, part, strict=True):
            o[rows] = q
        used[rows] = thr
        return rows[over]

    for start in range(0, n_k, chunk):
        rows = np.arange(start, min(n_k, start + chunk))
        for step, thr in enumerate(ladder):
            last = step == len(ladder) - 1
            rows = run(rows, thr, None if last else max_subspace)
            if not rows.size:
                break
    if not batched:
        outs = tuple(o[0] for o in outs)
        used = used[0]
    return PerturbedLevels(*outs, threshold=used, order=order)


#: Largest ratio per order assumed by the geometric tail of the error estimate.
_MAX_TAIL_RATIO = 0.9

#: The error estimate is this many times the change of the result from order p to p + 2.
#: Measured on the aluminium model (200 k-points, 6 bands, second order): the plain change
#: covers the true error on 56 % of the (band, k) points, twice the change on 99.7 %.
ESTIMATE_SAFETY_FACTOR = 2.0


def _tail_ratio(mags: FloatArray, order: int) -> FloatArray:
    """Per-order ratio ``ρ = sqrt(|t_{q+2}| / |t_q|)``, ``q = max(p, 2)``, capped at 0.9.

    A two-step ratio, so that vanishing odd orders do not fake convergence; orders 0 and 1
    (the unperturbed energy and the diagonal of V) say nothing about convergence.
    """
    q = max(order, 2)
    num, den = mags[q + 2], mags[q]
    rho2 = np.full(num.shape, _MAX_TAIL_RATIO**2)
    np.divide(num, den, out=rho2, where=den > 0)
    rho2[num == 0] = 0.0
    return np.sqrt(np.minimum(rho2, _MAX_TAIL_RATIO**2))


def _difference_estimate(step: FloatArray, last: FloatArray, rho: FloatArray) -> FloatArray:
    """Error estimate of an order-p result from the two orders above it.

    ``ESTIMATE_SAFETY_FACTOR``-fold (or ``1/(1 - ρ)``-fold, if larger: the geometric tail)
    ``|E_{p+2} - E_p|``: the change of the result when two more orders are added (two, because
    odd orders often vanish at symmetric points). ``last`` (the size of order p+2 alone) is
    not used as a floor: on the aluminium model that floor halves the trusted points without
    catching a single underestimate.
    """
    factor = np.maximum(ESTIMATE_SAFETY_FACTOR, 1.0 / (1.0 - rho))
    return factor * step


def threshold_ladder(coupling_threshold: float) -> list[float]:
    """The thresholds tried in turn: the given one, then the larger steps of
    :data:`THRESHOLD_LADDER_STEPS`."""
    return [coupling_threshold] + [t for t in THRESHOLD_LADDER_STEPS if t > coupling_threshold]


def _gather(
    stores: list[NDArray], offsets: list[int], idx: NDArray[np.intp],
    columns: NDArray[np.intp] | None = None,
) -> NDArray:
    """Rows ``idx`` of the row-wise concatenation of ``stores`` (``offsets`` their starts),
    without building the concatenation; with ``columns`` (broadcast against ``idx[..., None]``)
    only those entries of each row."""
    shape = idx.shape + ((columns.shape[-1],) if columns is not None else stores[0].shape[1:])
    out = np.empty(shape, dtype=np.result_type(*stores))
    cols = None if columns is None else np.broadcast_to(columns, shape)
    for store, lo, hi in zip(stores, offsets[:-1], offsets[1:], strict=True):
        sel = (idx >= lo) & (idx < hi)
        if not sel.any():
            continue
        if cols is None:
            out[sel] = store[idx[sel] - lo]
        else:
            out[sel] = store[(idx[sel] - lo)[:, None], cols[sel]]
    return out


def _driver_chunk(
    ec: FloatArray,
    vv: NDArray,
    n_levels: int,
    n_t: int,
    order: int,
    thr: float,
    tol: float,
    indirect: bool,
    estimate_error: bool,
    outs: tuple[NDArray, ...],
    max_members: int | None = None,
) -> NDArray[np.bool_]:
    c, n = ec.shape
    # -- stage 1, vectorised over rows and targets: links and the RS series of every target
    targets = np.argsort(ec, axis=1, kind="stable")[:, :n_t]
    et = np.take_along_axis(ec, targets, axis=1)
    d = et[..., None] - ec[:, None, :]
    vcol, vt = _columns(vv, targets)  # vcol[k, t, m] = V_mt
    absd, r1, skip, dinv = _links(d, vcol, tol, thr)
    top = max(order + 2, 4) if estimate_error else order
    need_vpsi1 = indirect or top >= 3
    psi1 = dinv * vcol
    vpsi1 = psi1 @ vt if need_vpsi1 else None
    join = _indirect_join(vpsi1, absd, skip, thr) if indirect else skip.copy()
    np.put_along_axis(join, targets[..., None], False, axis=2)
    vdiag = np.real(np.take_along_axis(vcol, targets[..., None], axis=2)[..., 0])
    coeffs = _rs_core(dinv, vcol, vdiag, lambda x: x @ vt, top, vpsi1=vpsi1, psi1=psi1)
    e_nd = et + coeffs[1 : order + 1].sum(axis=0)
    if estimate_error:
        err_nd = _difference_estimate(
            np.abs(coeffs[order + 1] + coeffs[order + 2]), np.abs(coeffs[order + 2]),
            _tail_ratio(np.abs(coeffs), order))
    else:
        err_nd = np.full(et.shape, np.nan)
    ratio_nd = r1.max(axis=2)

    # -- stage 2: the groups of the targets (all rows at once), then their Löwdin series
    rows = np.repeat(np.arange(c), n_t)
    lab, steps, overflow = _grow_groups(
        ec, vv, rows, targets.ravel(), join.reshape(c * n_t, n), tol, thr, indirect,
        max_members,
    )
    lab[overflow] = -1  # incomplete groups: the caller redoes these rows, skip their work
    # V ψ¹ of every member is known from the grouping when the indirect rule ran: index it
    reuse = indirect and vpsi1 is not None and top >= 3
    if reuse:
        source = np.full((c, n), -1, dtype=np.intp)
        source[rows, targets.ravel()] = np.arange(c * n_t)
        psi_store = [psi1.reshape(c * n_t, n)]
        vpsi_store = [vpsi1.reshape(c * n_t, n)]
        offsets = [0, c * n_t]
        for fr, fm, a_new, c_new in steps:
            source[fr, fm] = offsets[-1] + np.arange(fr.size)
            offsets.append(offsets[-1] + fr.size)
            psi_store.append(a_new)
            vpsi_store.append(c_new)
    flat = np.flatnonzero(lab.ravel() >= 0)  # members, row-major
    m_row, m_lev = flat // n, flat % n
    gkey = m_row * n + lab.ravel()[flat]
    uniq, inv, counts = np.unique(gkey, return_inverse=True, return_counts=True)
    size = np.zeros(c * n, dtype=np.intp)
    size[flat] = counts[inv]
    single = size.reshape(c, n)[np.arange(c)[:, None], targets] == 1
    cr, ci = np.nonzero(single)
    cand = [
        (cr, e_nd[cr, ci], err_nd[cr, ci], ratio_nd[cr, ci],
         np.full(cr.size, TREATMENT_NONDEGENERATE), np.ones(cr.size, dtype=np.intp),
         targets[cr, ci])
    ]
    srt = np.argsort(gkey, kind="stable")
    starts = np.searchsorted(gkey[srt], uniq)
    lev_sorted, row_sorted = m_lev[srt], m_row[srt]
    for g in np.unique(counts[counts > 1]):
        sel = starts[counts == g]
        # X (top orders of g × n) and the six (top + 1)-term series of g × g per group
        step = max(1, 2_000_000 // (g * (n + 6 * (top + 1) * g)))
        for b0 in range(0, sel.size, step):
            st = sel[b0 : b0 + step]
            members = lev_sorted[st[:, None] + np.arange(g)]
            grow = row_sorted[st]
            vg = vv if vv.ndim == 2 else vv[grow]
            vx1t = None
            if reuse:
                # ψ¹ of member a skipped only levels linked to a (all inside the group), so
                # V X¹ = V ψ¹ - Σ_{l in group} ψ¹_l V e_l
                idx = source[grow[:, None], members]
                inside = _gather(psi_store, offsets, idx, members[:, None, :])
                vrows = vg.T[members] if vg.ndim == 2 else np.take_along_axis(
                    np.swapaxes(vg, 1, 2), members[:, :, None], axis=1)
                vx1t = _gather(vpsi_store, offsets, idx)
                vx1t -= inside @ vrows
            series, outside = _heff_batch(ec[grow], vg, members, top, vx1t=vx1t)
            w = np.linalg.eigvalsh(series[: order + 1].sum(axis=0))
            if estimate_error:
                # spectral norms t_j of the orders the estimate reads (q, q + 2, p + 2)
                used = sorted({max(order, 2), max(order, 2) + 2, order + 2})
                norms = np.zeros((top + 1, st.size))
                norms[used] = np.abs(np.linalg.eigvalsh(series[used])).max(axis=-1)
                w_next = np.linalg.eigvalsh(series[: order + 3].sum(axis=0))
                est = _difference_estimate(np.abs(w_next - w), norms[order + 2][:, None],
                                           _tail_ratio(norms, order)[:, None]).ravel()
            else:
                est = np.full(w.size, np.nan)
            cand.append(
                (np.repeat(grow, g), w.ravel(), est, np.repeat(outside, g),
                 np.full(w.size, TREATMENT_SUBSPACE), np.full(w.size, g, dtype=np.intp),
                 np.repeat(members.min(axis=1), g))
            )
    crow, ce, cerr, crat, ctr, cg, co = (np.concatenate(x) for x in zip(*cand, strict=True))
    # -- keep the n_levels lowest candidates per row, ascending
    pick = np.lexsort((ce, crow))
    crow = crow[pick]
    rank = np.arange(crow.size) - np.searchsorted(crow, crow)
    keep = rank < n_levels
    at = (crow[keep], rank[keep])
    for out, val in zip(outs, (ce, ctr, crat, cerr, cg, co), strict=True):
        out[at] = val[pick][keep]
    return overflow
