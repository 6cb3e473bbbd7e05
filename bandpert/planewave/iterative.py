"""The lowest bands of large plane-wave bases by a warm-started, preconditioned LOBPCG.

H(k) = H0(k) + V is never formed: the kinetic diagonal ħ²|k+G|²/2m0 multiplies, the local
potential is applied by FFT (:mod:`bandpert.planewave.fft_apply`). The eigensolver is the
locally optimal block preconditioned conjugate gradient method (LOBPCG: Knyazev, SIAM J. Sci.
Comput. 23, 517 (2001)): at each step the Rayleigh–Ritz problem on the span of the current
vectors X, the preconditioned residuals W and the previous directions P gives the new X. Here
every block is orthonormalised explicitly (twice-repeated projections, then an eigenvalue-based
orthonormalisation that drops dependent directions), so the small problem is a plain Hermitian
one. The preconditioner is that of Teter, Payne & Allan, Phys. Rev. B 40, 12255 (1989) (formula
quoted from memory): a residual component on G is scaled by

    K(x) = (27 + 18x + 12x² + 8x³) / (27 + 18x + 12x² + 8x³ + 16x⁴),   x = T_G / ⟨T⟩_j,

with T_G the kinetic energy of the plane wave and ⟨T⟩_j that of the current vector j; K → 1 for
plane waves below ⟨T⟩_j and falls as 27/(16x⁴) above, like (T − ε)⁻¹ in the kinetic-dominated
high-G part of the spectrum.

A block of ``n_bands`` plus :func:`buffer_bands` vectors is iterated; the run at one k stops when
the residual norms ‖Hx − θx‖ of the ``n_bands`` lowest vectors are all below ``tol_eV`` (the
buffer vectors are not waited for). A Ritz value with residual r lies within r²/δ of an
eigenvalue, δ the distance to the rest of the spectrum (Kato–Temple; Parlett, The Symmetric
Eigenvalue Problem, 1980, ch. 10), so a residual tolerance of 1e-6 eV gives the eigenvalues to
~1e-11 eV for gaps of 0.1 eV; degenerate levels converge as a set (the residual of any vector of
the converged subspace is small, whatever basis of the subspace the Ritz vectors pick).

Warm start: along a list of k-points the converged vectors of one k start the next. In the basis
centred on each k (ħ²|k+G|²/2m0 ≤ cutoff) the vectors are carried over by their G labels: the
coefficient on a plane wave kept at both k is copied, plane waves that enter start at zero (the
coefficients ψ_k(G) of a band are continuous in k). The first k starts from the lowest
eigenvectors of H restricted to the few hundred plane waves of lowest kinetic energy.

Only local spinless models: spin–orbit and nonlocal terms are built as dense matrices per k
(:func:`bandpert.planewave.solver.per_k_hamiltonians`) and stay with the dense solver.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..errors import InputError
from ..units import HBAR2_OVER_2M0_EV_A2
from .fft_apply import FFTPotential, material_fft_potential, matrix_fft_potential
from .model import KCentredModel, PlaneWaveModel

#: Default convergence test: the largest residual norm ‖Hx − θx‖ of the requested bands (eV).
DEFAULT_TOL_EV = 1e-6

#: Most LOBPCG steps at one k before the iterative solver gives that k to LAPACK.
MAX_ITERATIONS = 300

#: Plane waves of the first k's starting guess (H restricted to the lowest kinetic energies).
START_PLANE_WAVES = 200

#: Squared norm below which a direction of the previous step is dropped (columns of unit norm):
#: its image H p is carried by linear combination, whose rounding (~1e-16 × ‖H‖ × 1e2 eV) must
#: stay well below the residual tolerance after normalisation.
P_DROP = 1e-8

#: A carried start gets at most max(WARM_LEAST, 2 × the first k's fresh-start steps) steps;
#: then that k starts afresh from the restricted-basis guess.
WARM_LEAST = 4

Progress = Callable[[int, int], None]


def buffer_bands(n_bands: int) -> int:
    """Extra vectors iterated above the requested bands: max(4, ⌈n_bands / 4⌉).

    They keep the gap between the block and the rest of the spectrum open (the convergence
    rate of the top requested band depends on it) and hold the partners of a degenerate set cut
    by ``n_bands``.
    """
    return max(4, -(-n_bands // 4))


@dataclass(frozen=True)
class IterativeBands:
    """Lowest bands by the iterative solver, with its convergence record.

    Attributes
    ----------
    energies_eV : numpy.ndarray
        (n_k, n_bands) ascending at each k (absolute: the model's own zero).
    iterations : numpy.ndarray
        (n_k,) LOBPCG steps at each k (0 at a k handed to LAPACK).
    residual_eV : numpy.ndarray
        (n_k,) largest residual norm ‖Hx − θx‖ of the requested bands at each k.
    dense_fallbacks : int
        k-points that did not converge in :data:`MAX_ITERATIONS` steps and were diagonalised
        densely instead.
    block : int
        Vectors iterated (bands plus buffer).
    """

    energies_eV: np.ndarray
    iterations: np.ndarray
    residual_eV: np.ndarray
    dense_fallbacks: int
    block: int


def _orthonormalise(x: np.ndarray, drop: float = 1e-12) -> np.ndarray:
    """Orthonormal columns spanning ``x`` (dependent directions dropped): x (x^H x)^{-1/2}."""
    if x.shape[1] == 0:
        return x
    gram = x.conj().T @ x
    w, u = scipy.linalg.eigh(gram, check_finite=False)
    keep = w > drop * max(w[-1], np.finfo(float).tiny)
    return x @ (u[:, keep] / np.sqrt(w[keep]))


def _project_out(x: np.ndarray, *blocks: np.ndarray) -> np.ndarray:
    """x minus its components on the orthonormal ``blocks`` (twice: one pass loses digits)."""
    for _ in range(2):
        for b in blocks:
            if b is not None and b.shape[1]:
                x = x - b @ (b.conj().T @ x)
    return x


def teter_payne_allan(kinetic_eV: np.ndarray, vectors: np.ndarray,
                      residuals: np.ndarray) -> np.ndarray:
    """Residuals preconditioned column by column by K(T_G / ⟨T⟩_j) (module docstring)."""
    weight = np.abs(vectors) ** 2
    mean_t = np.maximum(kinetic_eV @ weight, 1e-3)  # ⟨T⟩_j, kept off zero
    x = kinetic_eV[:, None] / mean_t[None, :]
    num = 27.0 + x * (18.0 + x * (12.0 + 8.0 * x))
    return residuals * (num / (num + 16.0 * x**4))


def lobpcg_lowest(apply_h: Callable[[np.ndarray], np.ndarray], start: np.ndarray,
                  kinetic_eV: np.ndarray, n_want: int, tol_eV: float = DEFAULT_TOL_EV,
                  max_iterations: int = MAX_ITERATIONS, block: int | None = None
                  ) -> tuple[np.ndarray, np.ndarray, int, float]:
    """Lowest eigenpairs of a Hermitian operator by preconditioned LOBPCG (module docstring).

    Parameters
    ----------
    apply_h : callable
        ``apply_h(x)`` = H x for an (n, m) block.
    start : numpy.ndarray
        (n, j) starting vectors (any scale; dependent ones are dropped, and random
        directions fill the block when fewer than ``block`` remain). With more columns than
        ``block`` the first Rayleigh–Ritz step picks the best ``block`` combinations of them
        and the other Ritz vectors become the first step's P block.
    kinetic_eV : numpy.ndarray
        (n,) the kinetic diagonal, for the preconditioner.
    n_want : int
        Leading vectors whose residuals decide convergence (the rest are buffer).
    tol_eV : float
        Largest residual norm accepted.
    max_iterations : int
    block : int, optional
        Vectors iterated (default: the columns of ``start``).

    Returns
    -------
    values : numpy.ndarray
        (block,) Ritz values, ascending.
    vectors : numpy.ndarray
        (n, block) orthonormal Ritz vectors.
    iterations : int
        Steps taken; ``max_iterations + 1`` when not converged.
    residual : float
        Largest residual norm of the wanted vectors at the end.
    """
    n = start.shape[0]
    m = start.shape[1] if block is None else block
    x = _orthonormalise(start)
    if x.shape[1] < m:  # fill a rank-deficient start with reproducible random directions
        extra = np.random.default_rng(0).standard_normal((n, m - x.shape[1]))
        x = _orthonormalise(np.hstack([x, _project_out(extra.astype(start.dtype), x)]))
    hx = apply_h(x)
    theta, c = scipy.linalg.eigh(_hermitian(x.conj().T @ hx), check_finite=False)
    x, hx = x @ c, hx @ c
    p = hp = None
    if x.shape[1] > m:
        p, hp = x[:, m:], hx[:, m:]
        x, hx, theta = x[:, :m], hx[:, :m], theta[:m]
    residual = np.inf
    for it in range(max_iterations + 1):
        r = hx - x * theta
        norms = np.linalg.norm(r, axis=0)
        residual = float(norms[:n_want].max())
        if residual <= tol_eV:
            return theta, x, it, residual
        if it == max_iterations:
            break
        active = norms > tol_eV
        w = teter_payne_allan(kinetic_eV, x[:, active], r[:, active])
        w = _orthonormalise(_project_out(w, x))
        hw = apply_h(w)
        blocks, images = [x, w], [hx, hw]
        if p is not None:
            for _ in range(2):  # projections repeated, carried over to the images H p
                a, b = x.conj().T @ p, w.conj().T @ p
                p, hp = p - x @ a - w @ b, hp - hx @ a - hw @ b
            gw, gu = scipy.linalg.eigh(p.conj().T @ p, check_finite=False)
            # an absolute threshold: H p is carried by linear combination, not recomputed, so
            # a direction of tiny norm would carry rounding of H's scale into the small problem
            keep = gw > P_DROP
            t = gu[:, keep] / np.sqrt(gw[keep])
            p, hp = p @ t, hp @ t
            if p.shape[1]:
                blocks.append(p)
                images.append(hp)
        s = np.hstack(blocks)
        hs = np.hstack(images)
        vals, vecs = scipy.linalg.eigh(_hermitian(s.conj().T @ hs), check_finite=False)
        c = vecs[:, :m]
        theta = vals[:m]
        x, hx = s @ c, hs @ c
        p, hp = s[:, m:] @ c[m:], hs[:, m:] @ c[m:]
        if p.shape[1] == 0:
            p = hp = None
    return theta, x, max_iterations + 1, residual


def _hermitian(a: np.ndarray) -> np.ndarray:
    return 0.5 * (a + a.conj().T)


def _restricted_start(kinetic_eV: np.ndarray, dense_block: Callable[[np.ndarray], np.ndarray],
                      m: int, dtype: type, size: int = START_PLANE_WAVES) -> np.ndarray:
    """The m lowest eigenvectors of H restricted to the lowest-kinetic plane waves, embedded.

    ``dense_block(rows)`` gives V on those plane waves; :data:`START_PLANE_WAVES` of them (at
    least 2m) are kept.
    """
    n = len(kinetic_eV)
    few = np.argsort(kinetic_eV, kind="stable")[:min(n, max(size, 2 * m))]
    h_small = np.array(dense_block(few), dtype=dtype)
    h_small[np.arange(len(few)), np.arange(len(few))] += kinetic_eV[few]
    _, vecs = scipy.linalg.eigh(h_small, subset_by_index=(0, m - 1), check_finite=False)
    start = np.zeros((n, m), dtype=dtype)
    start[few] = vecs
    return start


def iterative_states(model: PlaneWaveModel, k_cart_invA: np.ndarray, n_bands: int,
                     tol_eV: float = DEFAULT_TOL_EV) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``n_bands`` eigenpairs of H(k) at one k in a fixed basis, by LOBPCG (V by FFT).

    The iterative counterpart of :func:`~bandpert.planewave.solver.exact_states` for local
    spinless models; degenerate levels come as a converged set (any orthonormal basis of the
    degenerate subspace).

    Returns
    -------
    energies_eV : numpy.ndarray
        (n_bands,) ascending.
    vectors : numpy.ndarray
        (model.size, n_bands) orthonormal columns on ``model.basis``.
    """
    if model.k_dependent:
        raise InputError("the iterative solver takes local spinless models only; expected the "
                         "dense solver", key="solver")
    fft = matrix_fft_potential(model.basis.miller, model.potential_eV)
    index = fft.grid_index(model.basis.miller)
    kinetic = model.kinetic_eV(k_cart_invA)[0]
    dtype = float if model.is_real else complex
    m = min(model.size, n_bands + buffer_bands(n_bands))
    start = _restricted_start(kinetic, lambda rows: model.potential_eV[np.ix_(rows, rows)], m,
                              dtype)
    theta, x, its, res = lobpcg_lowest(lambda v: kinetic[:, None] * v + fft.apply(v, index),
                                       start, kinetic, n_bands, tol_eV)
    if its > MAX_ITERATIONS:
        raise RuntimeError(f"LOBPCG did not converge in {MAX_ITERATIONS} steps (residual "
                           f"{res:.2e} eV)")
    return theta[:n_bands], x[:, :n_bands]


def iterative_energies(model: PlaneWaveModel | KCentredModel, k_cart_invA: np.ndarray,
                       n_bands: int, progress: Progress | None = None, *,
                       warm_start: bool = True, tol_eV: float = DEFAULT_TOL_EV,
                       fft: FFTPotential | None = None) -> IterativeBands:
    """Lowest ``n_bands`` eigenvalues of H(k) at each k by warm-started LOBPCG, V by FFT.

    The bases and eigenvalues are those of :func:`~bandpert.planewave.solver.exact_energies`:
    a :class:`~bandpert.planewave.model.KCentredModel` at each k in its own basis
    ħ²|k+G|²/2m0 ≤ cutoff, a :class:`~bandpert.planewave.model.PlaneWaveModel` in its one
    basis. The caller sets the BLAS threads (the solver module runs it on one).

    Parameters
    ----------
    model : PlaneWaveModel or KCentredModel
        Local and spinless (``model.k_dependent`` False).
    k_cart_invA : numpy.ndarray
        (n_k, d) Cartesian wave vectors (Å⁻¹), best in path order (each k starts the next).
    n_bands : int
    progress : callable, optional
        ``progress(done, total)``.
    warm_start : bool
        Start each k from the previous k's vectors (default); False starts every k afresh
        from the restricted-basis guess (for measuring what the warm start saves).
    tol_eV : float
        Convergence test on the residual norms of the requested bands.
    fft : FFTPotential, optional
        A grid potential built before (must hold the plane waves of every k).

    Returns
    -------
    IterativeBands
    """
    if model.k_dependent:
        raise InputError("the iterative solver takes local spinless models only (spin–orbit and "
                         "nonlocal terms are built densely per k); expected the dense solver",
                         key="solver")
    if not 0 < tol_eV < 1:
        raise InputError(f"a residual tolerance of {tol_eV:g} eV; expected 0 < tol_eV < 1",
                         key="tol_eV")
    k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
    n_k = len(k)
    centred = isinstance(model, KCentredModel)
    if n_bands > model.size:
        raise InputError(f"{n_bands} bands asked for but the basis holds only {model.size} plane "
                         "waves; expected fewer bands or a larger cutoff", key="bands")
    if centred:
        reach = float(np.max(np.linalg.norm(k, axis=1), initial=0.0))
        cand, flat, table, origin = model.candidates(reach)
        miller, g_all = cand.miller, cand.g_cart_invA
        real = not np.iscomplexobj(table)
        if fft is None:
            fft = material_fft_potential(model.material, np.max(np.abs(miller), axis=0))
    else:
        miller, g_all = model.basis.miller, model.basis.g_cart_invA
        real = model.is_real
        if fft is None:
            fft = matrix_fft_potential(miller, model.potential_eV)
    grid_all = fft.grid_index(miller)
    dtype = float if real else complex
    block = min(model.size, n_bands + buffer_bands(n_bands))
    limit = model.cutoff_eV * (1 + 1e-12) if centred else np.inf
    out = np.empty((n_k, n_bands))
    iterations = np.zeros(n_k, dtype=int)
    residuals = np.zeros(n_k)
    fallbacks = 0
    previous = earlier = None  # the last two k's vectors on the whole candidate list
    warm_limit = None  # steps a carried start may take: twice the fresh start's at the first k
    step = max(1, n_k // 50)
    for i, kk in enumerate(k):
        kg = kk + g_all
        free_all = HBAR2_OVER_2M0_EV_A2 * np.einsum("gi,gi->g", kg, kg)  # the cutoff's
        kinetic_all = model.kinetic_factor * free_all  # H0's diagonal
        if centred:
            lowest = np.partition(free_all, n_bands - 1)[n_bands - 1]
            sel = np.flatnonzero(free_all <= max(limit, lowest * (1 + 1e-12)))
        else:
            sel = np.arange(len(kinetic_all))
        kinetic = kinetic_all[sel]
        index = grid_all[sel]
        n = len(sel)
        m = min(block, n)

        def apply_h(x: np.ndarray, kinetic=kinetic, index=index) -> np.ndarray:
            return kinetic[:, None] * x + fft.apply(x, index)

        def dense_block(rows: np.ndarray, sel=sel) -> np.ndarray:
            if centred:
                codes = flat[sel[rows]]
                return table[origin + codes[:, None] - codes[None, :]]
            return model.potential_eV[np.ix_(rows, rows)]

        if warm_start and previous is not None:
            carried = [previous[sel]] + ([] if earlier is None else [earlier[sel]])
            theta, x, its, res = lobpcg_lowest(apply_h, np.hstack(carried), kinetic, n_bands,
                                               tol_eV, warm_limit, block=m)
            if its > warm_limit:  # a poor carried start (a band entering, a jump): afresh
                theta, x, its2, res = lobpcg_lowest(
                    apply_h, _restricted_start(kinetic, dense_block, m, dtype), kinetic,
                    n_bands, tol_eV)
                its = its2 + warm_limit if its2 <= MAX_ITERATIONS else its2
        else:
            theta, x, its, res = lobpcg_lowest(
                apply_h, _restricted_start(kinetic, dense_block, m, dtype), kinetic, n_bands,
                tol_eV)
            if warm_limit is None:
                warm_limit = max(WARM_LEAST, 2 * its)
        if its > MAX_ITERATIONS:
            fallbacks += 1
            h = dense_block(np.arange(n))
            h[np.arange(n), np.arange(n)] += kinetic
            theta, x = scipy.linalg.eigh(h, subset_by_index=(0, m - 1), check_finite=False)
            its, res = 0, 0.0
        out[i] = theta[:n_bands]
        iterations[i] = its
        residuals[i] = res
        if warm_start:
            earlier = previous
            previous = np.zeros((len(kinetic_all), m), dtype=dtype)
            previous[sel] = x
        if progress and (i % step == 0 or i == n_k - 1):
            progress(i + 1, n_k)
    return IterativeBands(energies_eV=out, iterations=iterations, residual_eV=residuals,
                          dense_fallbacks=fallbacks, block=block)
