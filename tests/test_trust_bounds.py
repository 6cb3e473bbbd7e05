"""The a-posteriori eigenvalue bounds behind the trust mark, against exact diagonalisation."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bandpert.perturbation.bounds import eigenvalue_bounds, first_outside_lower_bounds


def _problem(seed: int, n: int, strength: float, degenerate: bool, complex_v: bool):
    """A free-electron-like diagonal (optionally with exact degeneracies) and a dense V."""
    rng = np.random.default_rng(seed)
    e0 = np.sort(rng.uniform(0.0, 40.0, size=(3, n)), axis=1)
    if degenerate:  # repeated levels, as at zone-boundary points
        e0[:, 1::3] = e0[:, 0::3][:, : e0[:, 1::3].shape[1]]
        e0 = np.sort(e0, axis=1)
    a = rng.normal(size=(n, n)) + (1j * rng.normal(size=(n, n)) if complex_v else 0.0)
    v = strength * (a + a.conj().T) / np.sqrt(8 * n)
    return e0, v


def _exact(e0: np.ndarray, v: np.ndarray, m: int) -> np.ndarray:
    return np.array([np.linalg.eigvalsh(np.diag(row) + v)[:m] for row in e0])


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), n=st.integers(12, 70), strength=st.floats(0.05, 6.0),
       degenerate=st.booleans(), complex_v=st.booleans(), block=st.integers(8, 40),
       noise=st.floats(0.0, 0.3))
def test_bound_contains_the_sorted_exact_eigenvalue(seed, n, strength, degenerate, complex_v,
                                                    block, noise):
    # Reference: LAPACK eigenvalues of the same matrix (numpy.linalg.eigvalsh). The bound is a
    # theorem (Kahan's cluster theorem, Kato-Temple/Mathias quadratic bound, Schur-complement
    # inertia; Parlett, The Symmetric Eigenvalue Problem, 1998, ch. 10-11, from memory), so it
    # must hold on every problem, strong or weak, degenerate or not, whatever the trial energies.
    e0, v = _problem(seed, n, strength, degenerate, complex_v)
    m = 5
    exact = _exact(e0, v, m)
    rng = np.random.default_rng(seed + 1)
    guess = np.sort(exact + noise * rng.normal(size=exact.shape), axis=1)
    b = eigenvalue_bounds(e0, v, guess, block=block)
    assert np.all(np.abs(guess - exact) <= b.error_bound * (1 + 1e-9) + 1e-9)
    assert np.all(np.abs(b.ritz - exact) <= b.ritz_bound * (1 + 1e-9) + 1e-9)


def test_bound_is_tight_for_a_weak_potential():
    # Weak V: the Ritz values are then accurate far below 1 meV and the bound says so
    # (exact diagonalisation as reference).
    e0, v = _problem(3, 60, 0.3, degenerate=True, complex_v=True)
    exact = _exact(e0, v, 6)
    b = eigenvalue_bounds(e0, v, exact, block=24)
    assert np.all(np.isfinite(b.ritz_bound))
    assert np.max(b.ritz_bound) < 1e-4
    assert np.max(b.error_bound) < 1e-4


def test_whole_basis_in_the_block_is_exact():
    e0, v = _problem(5, 20, 2.0, degenerate=False, complex_v=False)
    exact = _exact(e0, v, 4)
    b = eigenvalue_bounds(e0, v, exact + 0.01, block=64)
    assert b.ritz == pytest.approx(exact, abs=1e-10)
    assert b.error_bound == pytest.approx(np.full(exact.shape, 0.01), abs=1e-9)


def test_lower_bounds_of_the_levels_from_a_block():
    # mu_j <= lambda_j for every j (Schur complement and Haynsworth inertia additivity; from
    # memory), checked against exact eigenvalues; with no coupling to Q it is w_j itself.
    e0, v = _problem(11, 50, 3.0, degenerate=False, complex_v=False)
    row = e0[0]
    h = np.diag(row) + v
    p = np.argsort(row)[:20]
    q = np.setdiff1d(np.arange(50), p)
    w = np.linalg.eigvalsh(h[np.ix_(p, p)])
    s = np.linalg.norm(v[np.ix_(p, q)], 2)
    q0 = row[q].min() + np.linalg.eigvalsh(v)[0]
    mu = first_outside_lower_bounds(w[None, :], np.array([s]), np.array([q0]))[0]
    lam = np.linalg.eigvalsh(h)[:20]
    assert np.all(mu <= lam + 1e-12)
    assert first_outside_lower_bounds(w[None, :3], np.array([0.0]), np.array([1e9]))[0] == (
        pytest.approx(w[:3]))


def test_cannot_vouch_means_infinite_bound():
    # Bands 4 and 5 exactly degenerate in H and the block cut between them: the counting
    # argument cannot close at band 4 when only 4 levels are examined without extra Ritz values.
    e0 = np.array([[0.0, 1.0, 2.0, 3.0, 3.0, 50.0, 60.0]])
    v = np.zeros((7, 7))
    v[0, 5] = v[5, 0] = 0.5
    b = eigenvalue_bounds(e0, v, np.array([[0.0, 1.0, 2.0, 3.0]]), block=4, extra=0)
    assert np.isinf(b.error_bound[0, 3])
    assert np.all(np.isfinite(b.error_bound[0, :3]))
