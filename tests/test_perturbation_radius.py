"""Convergence radius of perturbation series against the exceptional points of H0 + λV.

The reference is independent of the series: the exceptional points (EPs) are the complex λ at
which H0 + λV has a double eigenvalue, i.e. the roots of the discriminant
Π_{i<j} (E_i - E_j)² of the characteristic polynomial (Kato, *Perturbation Theory for Linear
Operators*, Springer 1966, ch. II §1: the eigenvalues are branches of one analytic function
whose only singularities are these points). They are found as the eigenvalues of a quadratic
eigenvalue problem: K(λ) = H(λ) ⊗ 1 - 1 ⊗ H(λ) has the eigenvalues E_i - E_j (Horn & Johnson,
*Topics in Matrix Analysis*, Cambridge 1991, Thm. 4.4.5, from memory) and maps antisymmetric
tensors to symmetric ones, so K² restricted to the antisymmetric subspace has the eigenvalues
(E_i - E_j)², i < j, and det[Q_A^T K(λ)² Q_A] is the discriminant, quadratic in λ per entry.
The radius of a level's series is the modulus of the nearest EP at which the branch continued
from E_n(0) along the straight ray from 0 is one of the two coalescing eigenvalues (Kato, ch.
II §1-2); the branch is followed numerically along each ray. For a Löwdin group the limit is
the nearest EP at which a continued member meets a level outside the group (Kato, ch. II §2:
the group's total projection is analytic until then).

Acceptance (issue 13): on seeded random 8x8 problems (diagonal H0 with distinct levels, dense
complex Hermitian V scaled so that the true radii are log-uniform on [0.2, 5]), at the 30
orders the band-structure commands use: wrong-side calls of λ = 1 <= 1 % (true radius in
[0.9, 1.1] left out), radius off by more than 2x <= 1 % of the determined ones, undetermined
<= 10 %. 100 problems always; 400 in the test marked ``slow``.
"""

from __future__ import annotations

import functools

import numpy as np
import pytest
import scipy.linalg

import bandpert.perturbation as pt
from bandpert.physics.perturbative_bands import RADIUS_ORDERS

N_LEVELS = 8


def _antisymmetric_basis(n: int) -> np.ndarray:
    pairs = [(i, j) for i in range(n) for j in range(i + 1, n)]
    q = np.zeros((n * n, len(pairs)))
    for c, (i, j) in enumerate(pairs):
        q[i * n + j, c] = q[j * n + i, c] = np.sqrt(0.5)
        q[j * n + i, c] *= -1.0
    return q


def exceptional_points(e0: np.ndarray, v: np.ndarray) -> np.ndarray:
    """All λ where diag(e0) + λ v has a double eigenvalue (the discriminant's n(n-1) roots)."""
    n = len(e0)
    eye = np.eye(n)
    h0 = np.diag(e0).astype(complex)
    k0 = np.kron(h0, eye) - np.kron(eye, h0)
    k1 = np.kron(v, eye) - np.kron(eye, v)
    q = _antisymmetric_basis(n)
    m0, m1, m2 = (q.T @ x @ q for x in (k0 @ k0, k0 @ k1 + k1 @ k0, k1 @ k1))
    m = m0.shape[0]
    zero, one = np.zeros((m, m)), np.eye(m)
    lam = scipy.linalg.eigvals(np.block([[zero, one], [-m0, -m1]]),
                               np.block([[one, zero], [zero, m2]]))
    return lam[np.isfinite(lam)]


def branch_radius(e0: np.ndarray, v: np.ndarray, members: list[int], steps: int = 100,
                  batch: int = 4) -> float:
    """|λ*| of the nearest EP where a branch continued from e0[members] meets one from outside.

    For one member that is the radius of its Rayleigh–Schrödinger series. EPs come in
    complex-conjugate pairs (H(λ̄) = H(λ)†), so only Im λ > 0 is searched, nearest first. Each
    branch is followed along the ray λ = t λ*, t in (0, 1), by a linear predictor and nearest
    eigenvalue; at λ* the coalescing pair is the closest pair of eigenvalues.
    """
    eps = exceptional_points(e0, v)
    eps = eps[eps.imag > 0]
    eps = eps[np.argsort(np.abs(eps))]
    h0 = np.diag(e0)
    n = len(e0)
    t = (np.arange(1, steps + 1) / steps) * (1.0 - 1e-7)
    for s0 in range(0, len(eps), batch):
        ep = eps[s0 : s0 + batch]
        r = np.arange(len(ep))[:, None]
        ev = np.linalg.eigvals(h0 + (t[None, :] * ep[:, None])[..., None, None] * v)
        cur = np.broadcast_to(e0[members].astype(complex), (len(ep), len(members))).copy()
        prev = cur.copy()
        for s in range(steps):
            guess = 2 * cur - prev
            k = np.argmin(np.abs(ev[:, s, None, :] - guess[:, :, None]), axis=2)
            prev, cur = cur, ev[r, s, k]
        w = np.linalg.eigvals(h0 + ep[:, None, None] * v)
        d = np.abs(w[:, :, None] - w[:, None, :]) + np.eye(n) * 1e300
        a, b = np.unravel_index(d.reshape(len(ep), -1).argmin(axis=1), (n, n))
        rr = r[:, 0]
        meet = 0.5 * (w[rr, a] + w[rr, b])
        dist = np.abs(w - meet[:, None])
        dist[rr, a] = dist[rr, b] = np.inf
        near = np.abs(cur - meet[:, None]) < 0.1 * dist.min(axis=1)[:, None]
        hit = near.sum(axis=1) == 1  # exactly one of the coalescing pair is a member
        if hit.any():
            return float(np.abs(ep[np.argmax(hit)]))
    return np.inf


@functools.cache
def random_problem(number: int, seed: int = 2024) -> tuple:
    """(e0, v, index, true radius) of problem ``number``; V is scaled so that the radii are
    log-uniform on [0.2, 5]."""
    rng = np.random.default_rng([seed, number])
    e0 = np.cumsum(rng.uniform(0.3, 1.5, N_LEVELS))
    x = rng.normal(size=(N_LEVELS, N_LEVELS)) + 1j * rng.normal(size=(N_LEVELS, N_LEVELS))
    v0 = (x + x.conj().T) / 2
    index = int(rng.integers(N_LEVELS))
    target = float(np.exp(rng.uniform(np.log(0.2), np.log(5.0))))
    v = v0 * (branch_radius(e0, v0, [index]) / target)  # the radius scales as 1/|V|
    return e0, v, index, target


def random_problems(count: int) -> list[tuple]:
    return [random_problem(i) for i in range(count)]


def acceptance(problems) -> dict:
    true = np.array([p[3] for p in problems])
    est = np.array([pt.level_convergence_radius(e, v, i, RADIUS_ORDERS)
                    for e, v, i, _ in problems])
    known = np.isfinite(est)
    ratio = est[known] / true[known]
    clear = (true < 0.9) | (true > 1.1)
    wrong = np.sum((est[clear & known] > 1.0) != (true[clear & known] > 1.0))
    return {"undetermined": 1.0 - known.mean(),
            "off_2x": float(np.mean((ratio > 2.0) | (ratio < 0.5))),
            "wrong_side": wrong / clear.sum(),
            "median_error": float(np.median(np.abs(ratio - 1.0)))}


def check(stats: dict) -> None:
    assert stats["wrong_side"] <= 0.01, stats
    assert stats["off_2x"] <= 0.01, stats
    assert stats["undetermined"] <= 0.10, stats


def test_reference_on_the_two_level_problem():
    # closed form: H = [[0, λv], [λv*, Δ]] has E_± = Δ/2 ± sqrt(Δ²/4 + λ²|v|²), so its only
    # exceptional points are λ = ±iΔ/(2|v|) (source: Kato 1966, ch. II §1, example; closed form)
    e0, v = np.array([0.0, 1.3]), np.array([[0.0, 0.2 + 0.1j], [0.2 - 0.1j, 0.0]])
    radius = 1.3 / (2 * abs(0.2 + 0.1j))
    assert np.sort(exceptional_points(e0, v).imag) == pytest.approx([-radius, radius])
    assert branch_radius(e0, v, [0]) == pytest.approx(radius, rel=1e-10)


def test_reference_points_are_double_eigenvalues():
    # each root of the discriminant must be a λ where two eigenvalues coincide (definition,
    # Kato 1966, ch. II §1); far from any, the closest pair is well separated
    rng = np.random.default_rng(3)
    e0 = np.cumsum(rng.uniform(0.3, 1.5, 6))
    x = rng.normal(size=(6, 6)) + 1j * rng.normal(size=(6, 6))
    v = (x + x.conj().T) / 2
    eps = exceptional_points(e0, v)
    assert len(eps) == 6 * 5  # degree n(n-1) of the discriminant in λ
    spread = np.ptp(np.linalg.eigvalsh(np.diag(e0) + v))
    for lam in eps:
        w = np.linalg.eigvals(np.diag(e0) + lam * v)
        gap = np.abs(w[:, None] - w[None, :]) + np.eye(6) * 1e300
        assert gap.min() < 1e-5 * spread  # a square-root point: gap ~ sqrt(rounding)


def test_radius_of_random_problems():
    # 100 problems, about 7 s of CPU (the reference dominates); measured: none undetermined,
    # none off by 2x, no wrong side, median error 0.22 %
    check(acceptance(random_problems(100)))


@pytest.mark.slow
def test_radius_of_400_random_problems():
    # about 28 s of CPU; measured (one run): none undetermined, none off by 2x, no wrong side
    # of λ = 1 (379 problems outside [0.9, 1.1]), median error 0.22 %. The estimator replaced
    # here (root test with a free log p term) had 2.75 % off by 2x and 10 wrong sides (2.6 %).
    check(acceptance(random_problems(400)))


def test_undetermined_when_the_estimators_disagree():
    # two conjugate pairs of branch points of nearly equal modulus and different angles beat
    # against each other: c_p = Re[(e^{iθ1} / r)^p + (e^{iθ2} / (1.02 r))^p] p^{-3/2}; a tight
    # agreement factor refuses to guess, the estimate itself stays finite
    p = np.arange(31.0)
    c = (np.cos(p * 0.4) + 1.02**-p * np.cos(p * 2.3 + 1.0)) * 2.0**-p * np.maximum(p, 1) ** -1.5
    assert np.isnan(pt.convergence_radius(c, agreement=1.0001))
    assert np.isfinite(pt.convergence_radius(c, method="root"))
    assert np.isfinite(pt.convergence_radius(c, method="pair"))


def test_group_radius_against_level_meeting_outside():
    # a close pair (0.05 apart, strongly coupled) treated as one Löwdin group: its radius is
    # the nearest λ where a member meets a level outside (Kato 1966, ch. II §2); crossings of
    # the two members with each other do not count
    rng = np.random.default_rng(11)
    ratios = []
    for _ in range(12):
        e0 = np.concatenate([[0.0, 0.05], 0.05 + np.cumsum(rng.uniform(0.5, 1.5, 6))])
        x = rng.normal(size=(8, 8)) + 1j * rng.normal(size=(8, 8))
        v = (x + x.conj().T) / 2
        v *= branch_radius(e0, v, [0, 1]) / float(np.exp(rng.uniform(np.log(0.3), np.log(3))))
        true = branch_radius(e0, v, [0, 1], steps=300)
        est = pt.level_convergence_radius(e0, v, 0, RADIUS_ORDERS, subspace=[0, 1])
        ratios.append(est / true)
    ratios = np.array(ratios)
    known = np.isfinite(ratios)
    assert known.mean() >= 0.75, ratios
    assert np.all((ratios[known] > 0.8) & (ratios[known] < 1.25)), ratios
