"""Quasi-degenerate (Löwdin) perturbation theory: effective Hamiltonians of a subspace.

Closed forms to third order (:func:`lowdin_effective_hamiltonian`, :func:`subspace_levels`),
a recursion to any order (:func:`effective_hamiltonian_series`) and its batched core used by
the driver (:func:`_heff_batch`).

References
----------
.. [L51] P.-O. Löwdin, J. Chem. Phys. 19, 1396 (1951) (partitioning).
.. [W03] R. Winkler, *Spin-Orbit Coupling Effects in Two-Dimensional Electron and Hole Systems*,
   Springer (2003), App. B (quasi-degenerate perturbation theory; eq. B.15, numbering from
   memory).
.. [B58] C. Bloch, Nucl. Phys. 6, 329 (1958) (wave operator); J. des Cloizeaux, Nucl. Phys. 20,
   321 (1960) (Hermitian effective Hamiltonian); I. Lindgren and J. Morrison, *Atomic Many-Body
   Theory*, Springer (1982), ch. 9 (generalised Bloch equation). Citations from memory.
.. [SR80] I. Shavitt and L. T. Redmon, J. Chem. Phys. 73, 5711 (1980) (the des Cloizeaux and
   the canonical van Vleck effective Hamiltonians coincide; from memory, and checked
   numerically by the tests through third order).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .common import DEFAULT_DEGENERACY_TOL, FloatArray, _single

__all__ = [
    "effective_hamiltonian_series",
    "lowdin_effective_hamiltonian",
    "subspace_levels",
]


def _subspace_split(
    e: FloatArray, subspace: ArrayLike, tol: float
) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    a = np.asarray(subspace)
    if a.ndim != 1 or a.size == 0 or not np.issubdtype(a.dtype, np.integer):
        raise ValueError("subspace must be a non-empty 1-D array of level indices")
    if np.unique(a).size != a.size:
        raise ValueError("subspace indices must be distinct")
    n = e.size
    if a.min() < 0 or a.max() >= n:
        raise ValueError(f"subspace indices out of range for {n} levels")
    a = a.astype(np.intp)
    inside = np.zeros(n, dtype=bool)
    inside[a] = True
    b = np.flatnonzero(~inside)
    if b.size:
        gap = np.abs(e[a][:, None] - e[b][None, :])
        if np.any(gap <= tol):
            i, j = np.argwhere(gap <= tol)[0]
            raise ValueError(
                f"level {b[j]} is degenerate within {tol:g} with subspace member {a[i]}; "
                "the subspace must contain all levels degenerate with its members"
            )
    return a, b


def lowdin_effective_hamiltonian(
    e0: ArrayLike,
    v: ArrayLike,
    subspace: ArrayLike,
    lam: float = 1.0,
    order: int = 2,
    *,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> NDArray:
    r"""Hermitian effective Hamiltonian of a (quasi-)degenerate subspace, to a given order.

    With ``A`` the subspace (indices ``m, m', m''``) and ``B`` the rest (``l, l'``), and
    :math:`V` standing for :math:`\lambda V`, the terms are (Löwdin, J. Chem. Phys. 19, 1396
    (1951); Winkler, *Spin-Orbit Coupling Effects in 2D Electron and Hole Systems*, Springer
    2003, App. B, eq. B.15):

    .. math::

        H^{(0)}_{mm'} &= e_m \delta_{mm'}, \qquad H^{(1)}_{mm'} = V_{mm'}, \\
        H^{(2)}_{mm'} &= \tfrac12 \sum_l V_{ml}V_{lm'}
            \Big[\frac{1}{e_m - e_l} + \frac{1}{e_{m'} - e_l}\Big], \\
        H^{(3)}_{mm'} &= -\tfrac12 \sum_{l,m''}\Big[
            \frac{V_{ml}V_{lm''}V_{m''m'}}{(e_{m'} - e_l)(e_{m''} - e_l)}
          + \frac{V_{mm''}V_{m''l}V_{lm'}}{(e_m - e_l)(e_{m''} - e_l)}\Big] \\
          &\quad + \tfrac12 \sum_{l,l'} V_{ml}V_{ll'}V_{l'm'}\Big[
            \frac{1}{(e_m - e_l)(e_m - e_{l'})} + \frac{1}{(e_{m'} - e_l)(e_{m'} - e_{l'})}\Big].

    Each bracket is symmetrised so that :math:`H^{(p)}` is Hermitian. ``order=1`` is
    first-order degenerate theory, :math:`e_A + P V P`. Orders above 3 come from
    :func:`effective_hamiltonian_series` (which reproduces the closed forms above).

    Parameters
    ----------
    e0 : array_like, shape (n,)
        Unperturbed energies.
    v : array_like, shape (n, n)
        Hermitian perturbation.
    subspace : array_like of int, shape (g,)
        Indices of the subspace; every level degenerate with a member must be included.
    lam : float
        Coupling ``λ``.
    order : int
        Highest order kept (``>= 0``).
    degeneracy_tol : float
        Tolerance used to check that the subspace is separated from the rest.

    Returns
    -------
    ndarray, shape (g, g)
        :math:`\sum_{p \le order} H^{(p)}`, rows and columns in the order of ``subspace``.
    """
    if order < 0:
        raise ValueError("order must be >= 0")
    if order > 3:
        return effective_hamiltonian_series(
            e0, v, subspace, order, lam=lam, degeneracy_tol=degeneracy_tol
        ).sum(axis=0)
    e, vv = _single(e0, v, lam)
    a, b = _subspace_split(e, subspace, degeneracy_tol)
    ea = e[a]
    h = np.diag(ea).astype(np.result_type(vv.dtype, float))
    if order == 0:
        return h
    vaa = vv[np.ix_(a, a)]
    h = h + vaa
    if order == 1 or b.size == 0:
        return h
    w = vv[np.ix_(a, b)]  # V_AB
    dd = 1.0 / (ea[:, None] - e[b][None, :])  # D_ml = 1/(e_m - e_l)
    f = w * dd  # F_ml = V_ml / (e_m - e_l)
    h2 = 0.5 * (f @ w.conj().T + w @ f.conj().T)
    h = h + h2
    if order == 2:
        return h
    kk = f @ vv[np.ix_(b, b)]  # K_ml' = sum_l F_ml V_ll'
    t2 = ((vaa @ f) * dd) @ w.conj().T  # sum V_mm'' V_m''l V_lm' / ((e_m-e_l)(e_m''-e_l))
    t3 = (kk * dd) @ w.conj().T  # sum V_ml V_ll' V_l'm' / ((e_m-e_l)(e_m-e_l'))
    h3 = -0.5 * (t2 + t2.conj().T) + 0.5 * (t3 + t3.conj().T)
    return h + h3


def _heff_batch(
    eg: FloatArray,
    vv: NDArray,
    members: NDArray[np.intp],
    max_order: int,
    vx1t: NDArray | None = None,
) -> tuple[NDArray, FloatArray]:
    """Hermitian effective-Hamiltonian terms of many subspaces of equal size at once.

    ``eg`` (G, n) are the spectra, ``vv`` the shared (n, n) coupling or the (G, n, n) couplings
    of the G problems, ``members`` (G, g) the subspace indices. Generalised Bloch equation for
    the wave operator ``Ω = P + X`` (X maps A to B, intermediate normalisation), order by order,

        X^(p)_la (e_a - e_l) = δ_p1 V_la + (V_BB X^(p-1))_la - Σ_{j=1..p-1} (X^(j) H_B^(p-j))_la,
        H_B^(1) = V_AA,  H_B^(p) = V_AB X^(p-1)  (p >= 2),

    then made Hermitian with the metric S = 1 + X†X:  H = S^(1/2) H_B S^(-1/2) (des Cloizeaux),
    all as power series. X is stored transposed, (G, g, n), on all n levels (zero on A), so
    that V X is one GEMM over the whole batch. Returns the terms (max_order + 1, G, g, g) and,
    per subspace, the largest direct coupling ratio from a member to a level outside.
    ``vx1t`` optionally supplies (V X^(1))^T, shape (G, g, n), when already known.
    """
    n_g, n = eg.shape
    g = members.shape[1]
    ea = np.take_along_axis(eg, members, axis=1)
    in_a = np.zeros((n_g, n), dtype=bool)
    np.put_along_axis(in_a, members, True, axis=1)
    dtype = np.result_type(vv.dtype, float)
    complex_ = np.iscomplexobj(vv)
    if vv.ndim == 2:
        vab = vv[members]  # (G, g, n): V_am (a fresh copy)
    else:
        vab = np.take_along_axis(vv, members[:, :, None], axis=1)
    vaa = np.take_along_axis(vab, members[:, None, :], axis=2)
    # V_AB: zero the A columns in place (only G g² entries)
    np.put_along_axis(vab, np.broadcast_to(members[:, None, :], (n_g, g, g)), 0.0, axis=2)
    # 1/(e_a - e_l), 0 on the A columns: an infinite denominator there gives an exact 0
    dinv = np.divide(1.0, ea[:, :, None] - np.where(in_a, -np.inf, eg)[:, None, :])
    vab_t = np.swapaxes(vab, 1, 2)  # conj of V_BA

    def xt_times_vt(xt: NDArray) -> NDArray:  # (V X)^T for X^T = xt
        if vv.ndim == 2:
            return (xt.reshape(n_g * g, n) @ vv.T).reshape(n_g, g, n)
        return xt @ np.swapaxes(vv, 1, 2)

    hb = np.zeros((max_order + 1, n_g, g, g), dtype=dtype)
    hb[0] = ea[:, :, None] * np.eye(g)
    if max_order >= 1:
        hb[1] = vaa
    xt: list[NDArray] = [np.zeros((n_g, g, n), dtype=dtype)]
    ratio = np.zeros(n_g)
    for p in range(1, max_order):
        if p == 1:
            rhs = np.conj(vab) if complex_ else vab
        elif p == 2 and vx1t is not None:
            rhs = vx1t
        else:
            rhs = xt_times_vt(xt[p - 1])
        for j in range(1, p):
            rhs = rhs - np.swapaxes(hb[p - j], 1, 2) @ xt[j]
        xt.append(rhs * dinv)
        if p == 1:  # |V_la| / |e_a - e_l| over the levels outside: the entries of X^(1)
            ratio = np.abs(xt[1]).max(axis=(1, 2))
        hb[p + 1] = np.swapaxes(xt[p] @ vab_t, 1, 2)
    if max_order < 2:
        ratio = (np.abs(vab) * np.abs(dinv)).max(axis=(1, 2))
    if g == 1:
        return hb, ratio  # 1x1: the Bloch form is the Rayleigh–Schrödinger series
    eye = np.broadcast_to(np.eye(g, dtype=dtype), (n_g, g, g))

    def dagger(x: NDArray) -> NDArray:
        return np.conj(np.swapaxes(x, -1, -2))

    def paired(terms: Callable[[int], NDArray], p: int) -> NDArray:
        """Σ_{i=1..p-1} M_i with M_{p-i} = M_i†: the pairs once, plus the middle term."""
        acc = np.zeros((n_g, g, g), dtype=dtype)
        for i in range(1, (p + 1) // 2):
            m = terms(i)
            acc += m + dagger(m)
        if p % 2 == 0:
            acc += terms(p // 2)
        return acc

    # metric S^(p) = sum_{i+j=p; i,j>=1} X^(i)† X^(j)  (Hermitian: the (i, j), (j, i) pairs)
    s = np.zeros_like(hb)
    s[0] = eye
    for p in range(2, max_order + 1):
        s[p] = paired(lambda i, p=p: np.conj(xt[i]) @ np.swapaxes(xt[p - i], 1, 2), p)
    # T = S^(1/2): 2 T^(p) = S^(p) - sum_{j=1..p-1} T^(j) T^(p-j);  U = T^(-1)
    # (T^(0) = U^(0) = 1: products with them are copies)
    t = np.zeros_like(hb)
    u = np.zeros_like(hb)
    t[0] = eye
    u[0] = eye
    for p in range(1, max_order + 1):
        t[p] = 0.5 * (s[p] - paired(lambda j, p=p: t[j] @ t[p - j], p))
        acc = -t[p]
        for j in range(1, p):
            acc -= t[j] @ u[p - j]
        u[p] = acc
    th = np.zeros_like(hb)
    for p in range(max_order + 1):
        th[p] = hb[p]
        for i in range(1, p + 1):
            th[p] += t[i] @ hb[p - i]
    h = np.zeros_like(hb)
    for p in range(max_order + 1):
        h[p] = th[p]
        for i in range(p):
            h[p] += th[i] @ u[p - i]
    return 0.5 * (h + np.conj(np.swapaxes(h, 2, 3))), ratio


def effective_hamiltonian_series(
    e0: ArrayLike,
    v: ArrayLike,
    subspace: ArrayLike,
    max_order: int,
    *,
    lam: float = 1.0,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> NDArray:
    r"""Order-by-order Hermitian effective Hamiltonian of a subspace, to any order.

    The wave operator :math:`\Omega = P + X` (Bloch, Nucl. Phys. 6, 329 (1958)) obeys the
    generalised Bloch equation :math:`X H_0 - H_0 X = QVP + QVX - X(PVP + PVX)` (Lindgren &
    Morrison, *Atomic Many-Body Theory*, ch. 9), solved order by order,

    .. math::

        X^{(p)}_{la}(e_a - e_l) = \delta_{p1} V_{la} + (V_{BB} X^{(p-1)})_{la}
            - \sum_{j=1}^{p-1} (X^{(j)} H_{\rm B}^{(p-j)})_{la}, \qquad
        H_{\rm B}^{(p)} = V_{AB} X^{(p-1)},

    and the non-Hermitian Bloch Hamiltonian :math:`H_{\rm B}` is made Hermitian with the
    metric :math:`S = 1 + X^\dagger X`, :math:`H = S^{1/2} H_{\rm B} S^{-1/2}` (des Cloizeaux,
    Nucl. Phys. 20, 321 (1960)), expanded as power series. This Hermitian form equals the
    canonical (van Vleck / Schrieffer–Wolff) effective Hamiltonian of Winkler (2003), App. B
    (Shavitt & Redmon, J. Chem. Phys. 73, 5711 (1980)); the tests check orders 2 and 3 against
    the closed forms of :func:`lowdin_effective_hamiltonian`. For a single level the terms are
    the Rayleigh–Schrödinger energies. Each order costs ``g`` matrix-vector products with ``V``.

    Parameters
    ----------
    e0, v, subspace, lam, degeneracy_tol
        As in :func:`lowdin_effective_hamiltonian`.
    max_order : int
        Highest order.

    Returns
    -------
    ndarray, shape (max_order + 1, g, g)
        Hermitian terms ``H^(p)`` (already multiplied by ``λ^p``).
    """
    if max_order < 0:
        raise ValueError("max_order must be >= 0")
    e, vv = _single(e0, v, lam)
    a, _ = _subspace_split(e, subspace, degeneracy_tol)
    series, _ = _heff_batch(e[None, :], vv, a[None, :], max_order)
    return series[:, 0]


def subspace_levels(
    e0: ArrayLike,
    v: ArrayLike,
    subspace: ArrayLike,
    lam: float = 1.0,
    order: int = 2,
    *,
    degeneracy_tol: float = DEFAULT_DEGENERACY_TOL,
) -> FloatArray:
    r"""Perturbative energies of a subspace: eigenvalues of its effective Hamiltonian.

    :math:`E_i = \mathrm{eig}_i\big(\sum_{p \le order} H^{(p)}\big)` with :math:`H^{(p)}` from
    :func:`lowdin_effective_hamiltonian` (Löwdin 1951; Winkler 2003, App. B).

    Returns
    -------
    ndarray, shape (g,)
        Ascending eigenvalues.
    """
    h = lowdin_effective_hamiltonian(
        e0, v, subspace, lam, order, degeneracy_tol=degeneracy_tol
    )
    return np.linalg.eigvalsh(h)
