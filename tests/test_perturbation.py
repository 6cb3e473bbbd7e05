"""Tests of bandpert.perturbation (model-independent perturbation theory).

Outside values are marked with their source beside the check. Checks marked "internal
consistency" compare two independent implementations or a computation with exact
diagonalisation (numpy.linalg.eigvalsh) and need no source.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.special
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import bandpert.perturbation as pt

# --------------------------------------------------------------------------------------------
# model problems built here
# --------------------------------------------------------------------------------------------


def random_hermitian(rng: np.random.Generator, n: int, scale: float, complex_: bool = True):
    x = rng.normal(size=(n, n))
    if complex_:
        x = x + 1j * rng.normal(size=(n, n))
    return scale * (x + x.conj().T) / 2.0


def oscillator(n_states: int) -> tuple[np.ndarray, np.ndarray]:
    """Harmonic oscillator (ħ = m = ω = 1) in the number basis 0..N-1 and the matrix of x.

    x = (a + a†)/√2, so <n|x|n+1> = sqrt((n+1)/2).
    """
    e0 = np.arange(n_states) + 0.5
    x = np.diag(np.sqrt(np.arange(1, n_states) / 2.0), 1)
    return e0, x + x.T


def mathieu(nu: float, m_max: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cosine lattice in Mathieu units, plane-wave basis e^{i(2m+ν)z}, m = -M..M.

    The Mathieu equation y'' + (a - 2q cos 2z) y = 0 (Abramowitz & Stegun 1964, eq. 20.1.1)
    is the eigenproblem [-d²/dz² + 2q cos 2z] y = a y. Derivation of the matrix: -d²/dz² on
    e^{i(2m+ν)z} gives (2m+ν)²; 2q cos 2z = q (e^{2iz} + e^{-2iz}) maps e^{i(2m+ν)z} to
    q e^{i(2m±2+ν)z}, i.e. <m±1|2q cos 2z|m> = +q. So H0 = diag((2m+ν)²) and V = q × (ones on
    the first off-diagonals), with the sign +q for this (A&S) sign of the cosine; the
    eigenvalues at ν = 0 are a_{2r}, b_{2r}, at ν = 1 the a_{2r+1}, b_{2r+1}. λ plays q.
    """
    m = np.arange(-m_max, m_max + 1)
    e0 = (2.0 * m + nu) ** 2
    v = np.diag(np.ones(2 * m_max), 1)
    return e0, v + v.T, m


def free_electron_batch(n_k: int, n: int, rng: np.random.Generator, scale: float, cplx: bool):
    """Free-electron-like spectra |k + G|² of a simple-cubic set of G, and a weak random V."""
    grid = np.arange(-3, 4)
    gvec = np.array(np.meshgrid(grid, grid, grid, indexing="ij")).reshape(3, -1).T
    gvec = gvec[np.argsort(np.einsum("ij,ij->i", gvec, gvec), kind="stable")][:n]
    ks = np.linspace(0.0, 0.5, n_k)[:, None] * np.array([1.0, 0.6, 0.25])
    q = ks[:, None, :] + gvec
    e0 = np.einsum("kgi,kgi->kg", q, q)
    return e0, random_hermitian(rng, n, scale, cplx)


def exact_lowest(e0: np.ndarray, v: np.ndarray, n_levels: int, lam: float = 1.0):
    e2 = np.atleast_2d(e0)
    out = np.array([np.linalg.eigvalsh(np.diag(row) + lam * v)[:n_levels] for row in e2])
    return out if e0.ndim == 2 else out[0]


# --------------------------------------------------------------------------------------------
# Rayleigh–Schrödinger series
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("n_states", [2, 3, 4, 5, 8])
def test_oscillator_linear_perturbation_series(n_states):
    # H = p²/2 + x²/2 + λx: completing the square gives E_n = n + 1/2 - λ²/2 exactly, so
    # E^(2) = -1/2 and all higher orders vanish (any graduate QM text, e.g. Sakurai &
    # Napolitano, Modern Quantum Mechanics, ch. 5 problems: oscillator in a uniform field).
    e0, x = oscillator(n_states)
    c = pt.rs_energy_series(e0, x, 0, 2 * n_states)
    assert c[0] == pytest.approx(0.5)
    assert c[1] == pytest.approx(0.0, abs=1e-14)
    assert c[2] == pytest.approx(-0.5, abs=1e-14)
    # Truncation: x moves one level per order, so |ψ^(j)> lives on states 0..j and equals the
    # infinite-basis correction while j <= N-1; by the 2n+1 rule E^(2j+1) and E^(2j) need
    # only ψ^(0..j), hence E^(k) is exact (zero) through k = 2N-1 ...
    assert np.all(np.abs(c[3 : 2 * n_states]) < 1e-13)
    # ... and the truncation first shows at order 2N (internal consistency: proves the test
    # above is sensitive to the basis size).
    assert abs(c[2 * n_states]) > 1e-10


def test_rs_recursion_matches_batched_2n_plus_1_rule():
    # internal consistency: the direct recursion and the Wigner 2n+1 evaluation (source:
    # Wigner's 2n+1 rule, e.g. Sakurai & Napolitano, Modern Quantum Mechanics, ch. 5)
    rng = np.random.default_rng(3)
    n = 14
    e0 = np.sort(rng.uniform(0.0, 10.0, n))
    v = random_hermitian(rng, n, 0.3)
    batched = pt.energy_corrections(e0, v, 11)
    for idx in range(n):
        direct = pt.rs_energy_series(e0, v, idx, 11)
        scale = np.abs(direct[1:]).max()
        np.testing.assert_allclose(batched[:, idx], direct, rtol=0, atol=1e-10 * scale)


def test_energy_corrections_with_exclusion_and_batch():
    # internal consistency: masking a level from the sums = RS with that level excluded
    rng = np.random.default_rng(4)
    n, n_k = 10, 3
    e0 = np.sort(rng.uniform(0.0, 5.0, (n_k, n)), axis=1)
    v = random_hermitian(rng, n, 0.2)
    targets = np.array([[0, 4], [2, 7], [1, 9]])
    exclude = np.zeros((n_k, 2, n), dtype=bool)
    exclude[0, 1, 5] = exclude[1, 0, 3] = exclude[2, 1, 8] = True
    terms = pt.energy_corrections(e0, v, 6, targets=targets, exclude=exclude, lam=0.7)
    for k in range(n_k):
        for j in range(2):
            ex = np.flatnonzero(exclude[k, j])
            ref = pt.rs_energy_series(e0[k], 0.7 * v, targets[k, j], 6, exclude=ex)
            np.testing.assert_allclose(terms[:, k, j], ref, atol=1e-12)


def test_second_and_third_order_closed_forms():
    # source: textbook sums (Sakurai & Napolitano, Modern Quantum Mechanics, ch. 5: E2, and
    # E3 = Σ V_nm V_mk V_kn/(Δ_m Δ_k) − V_nn Σ|V_nm|²/Δ_m²) written out with einsum, against
    # the batched implementation
    rng = np.random.default_rng(5)
    n = 9
    e0 = np.sort(rng.uniform(0.0, 6.0, (2, n)), axis=1)
    v = random_hermitian(rng, n, 0.25)
    first, second = pt.second_order_shifts(e0, v)
    third = pt.energy_corrections(e0, v, 3)[3]
    for k in range(2):
        d = e0[k][:, None] - e0[k][None, :]  # d[n, m] = e_n - e_m
        r = np.zeros_like(d)
        off = ~np.eye(n, dtype=bool)
        r[off] = 1.0 / d[off]
        e2 = np.einsum("nm,mn,nm->n", v, v, r).real
        e3 = (np.einsum("nm,ml,ln,nm,nl->n", v, v, v, r, r)
              - np.diag(v) * np.einsum("nm,mn,nm->n", v, v, r**2)).real
        np.testing.assert_allclose(first[k], np.diag(v).real, atol=1e-14)
        np.testing.assert_allclose(second[k], e2, atol=1e-12)
        np.testing.assert_allclose(third[k], e3, atol=1e-12)


def test_rs_refuses_degenerate_level():
    e0 = np.array([0.0, 1.0, 1.0, 3.0])
    v = random_hermitian(np.random.default_rng(0), 4, 0.1)
    with pytest.raises(ValueError, match="degenerate"):
        pt.rs_energy_series(e0, v, 1, 3)
    with pytest.raises(ValueError, match="not excluded"):
        pt.second_order_shifts(e0, v)
    # excluding the partner makes the reduced resolvent well defined
    assert np.all(np.isfinite(pt.rs_energy_series(e0, v, 1, 3, exclude=[2])))


def test_state_series_solves_the_order_equations():
    # internal consistency: (E0 - H0)ψ^(k) = Q[Vψ^(k-1) - Σ_j E^(j) ψ^(k-j)], <n|ψ^(k)> = δ_k0
    rng = np.random.default_rng(6)
    n = 8
    e0 = np.sort(rng.uniform(0.0, 4.0, n))
    v = random_hermitian(rng, n, 0.3)
    res = pt.rs_series(e0, v, 2, 5)
    psi, en = res.states, res.energies
    assert np.allclose(psi[1:, 2], 0.0)
    for k in range(1, 6):
        lhs = (e0[2] - e0) * psi[k]
        rhs = v @ psi[k - 1] - sum(en[j] * psi[k - j] for j in range(1, k + 1))
        rhs[2] = 0.0
        np.testing.assert_allclose(lhs, rhs, atol=1e-12)
    np.testing.assert_allclose(pt.rs_state_series(e0, v, 2, 5), psi)


# --------------------------------------------------------------------------------------------
# two-level problem and convergence radius
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("coupling", [0.3, 0.2 + 0.1j, -0.15j])
def test_two_level_series_and_radius(coupling):
    delta = 1.3
    e0 = np.array([0.0, delta])
    v = np.array([[0.0, coupling], [np.conj(coupling), 0.0]])
    coeffs = pt.rs_energy_series(e0, v, 0, 40)

    def exact(lam):  # lower eigenvalue of [[0, λv],[λv*, Δ]]: Δ/2 - sqrt(Δ²/4 + λ²|v|²)
        return delta / 2 - np.sqrt(delta**2 / 4 + lam**2 * abs(coupling) ** 2)

    # Exceptional points at λ = ±iΔ/(2|v|), where the square root vanishes (source: Kato 1966, ch.
    # II;
    # closed form of the two-level problem).
    radius = delta / (2 * abs(coupling))
    lam_in = 0.8 * radius
    partial = np.cumsum(coeffs * lam_in ** np.arange(41))
    assert abs(partial[-1] - exact(lam_in)) < 1e-3 * abs(exact(lam_in))
    assert abs(partial[-1] - exact(lam_in)) < abs(partial[10] - exact(lam_in))
    lam_out = 1.2 * radius
    terms_out = np.abs(coeffs * lam_out ** np.arange(41))
    assert terms_out[40] > terms_out[20]  # terms grow outside the radius
    assert pt.convergence_radius(coeffs) == pytest.approx(radius, rel=0.01)
    assert pt.convergence_radius(coeffs[:31]) == pytest.approx(radius, rel=0.01)
    assert pt.convergence_radius(coeffs, method="root") == pytest.approx(radius, rel=0.01)
    assert pt.convergence_radius(coeffs, method="pade") == pytest.approx(radius, rel=0.05)
    assert pt.level_convergence_radius(e0, v, 1) == pytest.approx(radius, rel=0.01)


def test_convergence_radius_simple_series():
    # closed forms: Σ (λ/R)^p has radius R (a simple pole: the rank-one fallback of the pair
    # estimate is exact); sqrt(1 + λ²/R²) = Σ_k binom(1/2, k) (λ/R)^(2k) has its square-root
    # branch points at ±iR (every other term zero); a polynomial terminates (common practice,
    # no source)
    p = np.arange(41)
    assert pt.convergence_radius(0.7 * 2.5 ** -p) == pytest.approx(2.5, rel=1e-6)
    even = np.where(p % 2 == 0, scipy.special.binom(0.5, p // 2) * 3.0**-p, 0.0)
    assert pt.convergence_radius(even) == pytest.approx(3.0, rel=0.01)
    noisy = even + np.where(p % 2 == 1, 1e-17 * 3.0**-p, 0.0)
    assert pt.convergence_radius(noisy) == pytest.approx(3.0, rel=0.01)
    assert pt.convergence_radius([1.0, 2.0, -1.0, 0.0, 0.0, 0.0, 0.0, 0.0]) == np.inf
    e0, x = oscillator(10)
    assert pt.convergence_radius(pt.rs_energy_series(e0, x, 0, 19)) == np.inf


def test_level_convergence_radius_degenerate_group():
    # Levels 0 and 1 are degenerate; only level 0 couples (to level 2, a two-level problem),
    # so the group's effective-Hamiltonian series has the two-level radius Δ/(2|v|)
    # (closed form, see the two-level test).
    delta, coupling = 2.0, 0.4
    e0 = np.array([0.0, 0.0, delta])
    v = np.zeros((3, 3))
    v[0, 2] = v[2, 0] = coupling
    r = pt.level_convergence_radius(e0, v, 1)
    assert r == pytest.approx(delta / (2 * coupling), rel=0.05)


# --------------------------------------------------------------------------------------------
# cosine lattice (Mathieu)
# --------------------------------------------------------------------------------------------


def test_mathieu_a0_series_coefficients():
    # a0(q) = -q²/2 + 7q⁴/128 - 29q⁶/2304 + 68687q⁸/18874368 - ...
    # (Abramowitz & Stegun 1964, eq. 20.2.25; the q⁸ term from memory)
    e0, v, m = mathieu(0.0, 20)
    c = pt.rs_energy_series(e0, v, int(np.flatnonzero(m == 0)[0]), 9)
    expected = [0.0, 0.0, -1 / 2, 0.0, 7 / 128, 0.0, -29 / 2304, 0.0, 68687 / 18874368, 0.0]
    np.testing.assert_allclose(c, expected, rtol=1e-12, atol=1e-15)


def test_mathieu_zone_boundary_pair():
    # b1 = 1 - q - q²/8 + q³/64 - ..., a1 = 1 + q - q²/8 - q³/64 - ...
    # (source: Abramowitz & Stegun 1964, eq. 20.2.25)
    e0, v, m = mathieu(1.0, 12)
    pair = np.flatnonzero((m == 0) | (m == -1))  # both at (2m+1)² = 1
    terms = pt.effective_hamiltonian_series(e0, v, pair, 3)
    assert np.allclose(np.linalg.eigvalsh(terms[1]), [-1.0, 1.0])  # first order ±q
    assert np.allclose(terms[2], -np.eye(2) / 8)  # second order -q²/8 for both
    # third order: eigenvalues of H1 + λ H3 split as ∓q³/64 on the b1/a1 states
    h1, h3 = terms[1], terms[3]
    _, u = np.linalg.eigh(h1)
    assert np.allclose(np.diag(u.conj().T @ h3 @ u), [1 / 64, -1 / 64])
    # against scipy's characteristic values (same A&S convention) at small q: error O(q⁴)
    for q in (0.05, 0.1, 0.2):
        b1, a1 = pt.subspace_levels(e0, v, pair, lam=q, order=3)
        assert b1 == pytest.approx(scipy.special.mathieu_b(1, q), abs=0.01 * q**4)
        assert a1 == pytest.approx(scipy.special.mathieu_a(1, q), abs=0.01 * q**4)
        # b1 = 1 - q - q²/8 + q³/64 - q⁴/1536 (source: A&S 1964, eq. 20.2.25; the q⁴ term from
        # memory): the order-3 result must miss a q⁴ term
        assert abs(b1 - scipy.special.mathieu_b(1, q)) > 1e-4 * q**4


def test_mathieu_second_gap_opens_at_second_order():
    # b2 = 4 - q²/12 + ..., a2 = 4 + 5q²/12 - ... (source: Abramowitz & Stegun 1964, eq. 20.2.25):
    # the states m = ±1 (both at 4) are not coupled directly, so first order gives no gap.
    e0, v, m = mathieu(0.0, 12)
    pair = np.flatnonzero(np.abs(m) == 1)
    q = 0.1
    first = pt.subspace_levels(e0, v, pair, lam=q, order=1)
    assert np.allclose(first, [4.0, 4.0])
    second = pt.subspace_levels(e0, v, pair, lam=q, order=2)
    np.testing.assert_allclose(second, [4 - q**2 / 12, 4 + 5 * q**2 / 12], atol=1e-14)
    # the driver finds the degenerate pair itself and treats it as a subspace
    res = pt.perturbative_levels(e0, v, 3, lam=q, order=2)
    assert list(res.treatment) == [pt.TREATMENT_NONDEGENERATE] + [pt.TREATMENT_SUBSPACE] * 2
    np.testing.assert_allclose(res.energies[1:], second, atol=1e-14)
    assert list(res.group_size) == [1, 2, 2]


def test_mathieu_driver_against_scipy():
    # source: reference library scipy.special.mathieu_a/b (Abramowitz & Stegun 1964, ch. 20
    # convention, y'' + (a - 2q cos 2z) y = 0);
    # the perturbative values at order 4 must agree within their error estimate.
    e0k, vk, _ = mathieu(0.0, 12)
    e0b, vb, _ = mathieu(1.0, 12)
    for q in (0.05, 0.2, 0.4):
        res = pt.perturbative_levels(np.stack([e0k, e0b]), vk, 3, lam=q, order=4)
        ref_k = [scipy.special.mathieu_a(0, q), scipy.special.mathieu_b(2, q),
                 scipy.special.mathieu_a(2, q)]
        ref_b = [scipy.special.mathieu_b(1, q), scipy.special.mathieu_a(1, q),
                 scipy.special.mathieu_b(3, q)]
        err = np.abs(res.energies - np.array([ref_k, ref_b]))
        assert np.all(err <= res.error_estimate + 1e-12)
        assert np.all(err < 0.01 * q**5)  # order 4: error O(q^5) or smaller
    assert np.array_equal(vb, vk)  # one shared V serves both rows


def test_mathieu_a0_convergence_radius():
    # The nearest branch point of a0(q) is at q = ±1.4688i (Mulholland & Goldstein 1929;
    # Meixner & Schäfke 1954; from memory). source: NIST DLMF §28.6(i), radius of convergence
    # of the power series of a0(q) in q: 1.468769 (to the digits quoted). Independent check
    # done here: at q = i s the lowest two even eigenvalues coalesce and turn complex (an
    # exceptional point, Kato 1966).
    e0, v, m = mathieu(0.0, 40)
    coeffs = pt.rs_energy_series(e0, v, int(np.flatnonzero(m == 0)[0]), 60)
    radius = pt.convergence_radius(coeffs)
    assert radius == pytest.approx(1.468769, rel=0.01)
    # the 30 orders the band-structure commands use (perturbative_bands.RADIUS_ORDERS)
    assert pt.convergence_radius(coeffs[:31]) == pytest.approx(1.468769, rel=0.01)
    assert pt.convergence_radius(coeffs, method="pade") == pytest.approx(1.4688, rel=0.05)
    e_small, v_small, _ = mathieu(0.0, 15)

    def complex_pair(s: float) -> bool:
        w = np.linalg.eigvals(np.diag(e_small) + 1j * s * v_small)
        return abs(w[np.argmin(w.real)].imag) > 1e-9

    lo, hi = 1.0, 2.0
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if complex_pair(mid) else (mid, hi)
    assert radius == pytest.approx(lo, rel=0.05)
    assert lo == pytest.approx(1.4688, rel=1e-3)


# --------------------------------------------------------------------------------------------
# error scaling
# --------------------------------------------------------------------------------------------


def _slope(lams, errs):
    return np.polyfit(np.log(lams), np.log(errs), 1)[0]


def test_error_scaling_random_nondegenerate():
    # the order-p error is O(λ^(p+1)) (source: Kato 1966: the series is analytic at λ = 0);
    # internal consistency against exact diagonalisation
    rng = np.random.default_rng(7)
    n = 8
    e0 = np.arange(n) * 1.0 + rng.uniform(0, 0.3, n)
    v = random_hermitian(rng, n, 1.0)
    lams = np.array([0.01, 0.02, 0.04])
    coeffs = pt.energy_corrections(e0, v, 3)  # (4, n)
    exact = np.array([np.linalg.eigvalsh(np.diag(e0) + lam * v) for lam in lams])
    for p in (1, 2, 3):
        approx = np.array([(coeffs[: p + 1] * lam ** np.arange(p + 1)[:, None]).sum(0)
                           for lam in lams])
        for level in range(n):
            s = _slope(lams, np.abs(approx[:, level] - exact[:, level]))
            assert s == pytest.approx(p + 1, abs=0.3)


def test_error_scaling_cosine_a0():
    # a0: odd orders vanish, so the error after order p is O(q^j) with j the first non-zero
    # order above p: p = 1 -> 2, p = 2 -> 4, p = 3 -> 4 (source: A&S 1964, eq. 20.2.25 series)
    e0, v, _ = mathieu(0.0, 12)
    lams = np.array([0.02, 0.04, 0.08])
    for p, expected in ((1, 2), (2, 4), (3, 4)):
        errs = []
        for q in lams:
            res = pt.perturbative_levels(e0, v, 1, lam=q, order=p)
            errs.append(abs(res.energies[0] - scipy.special.mathieu_a(0, q)))
        assert _slope(lams, errs) == pytest.approx(expected, abs=0.3)


@pytest.mark.parametrize("order", [1, 2, 3, 4])
@pytest.mark.parametrize("group", [(3.0, 3.0, 3.0), (3.0, 3.3, 3.6)])
def test_error_scaling_subspace(order, group):
    # (quasi-)degenerate group {2, 3, 4}: eigenvalues of the order-p effective Hamiltonian
    # differ from the exact ones by O(λ^(p+1)) (source: Winkler 2003, App. B); internal consistency
    rng = np.random.default_rng(8)
    n = 10
    e0 = np.array([0.0, 1.0, *group, 5.0, 6.0, 7.5, 8.0, 9.0])
    v = random_hermitian(rng, n, 1.0)
    lams = np.array([0.005, 0.01, 0.02])
    errs = []
    for lam in lams:
        exact = np.linalg.eigvalsh(np.diag(e0) + lam * v)[2:5]
        approx = pt.subspace_levels(e0, v, [2, 3, 4], lam=lam, order=order)
        errs.append(np.abs(approx - exact).max())
    assert _slope(lams, errs) == pytest.approx(order + 1, abs=0.3)


# --------------------------------------------------------------------------------------------
# Löwdin effective Hamiltonian
# --------------------------------------------------------------------------------------------


def test_lowdin_closed_forms_match_bloch_series():
    # internal consistency: Winkler App. B closed forms (orders 1-3) vs the des Cloizeaux
    # Hermitised generalised-Bloch recursion; equal by Shavitt & Redmon, J. Chem. Phys. 73,
    # 5711 (1980)
    rng = np.random.default_rng(9)
    n = 12
    e0 = np.sort(rng.uniform(0.0, 8.0, n))
    e0[4:7] = [4.0, 4.0, 4.2]
    v = random_hermitian(rng, n, 0.4)
    sub = [6, 4, 5]
    series = pt.effective_hamiltonian_series(e0, v, sub, 5, lam=0.8)
    for order in range(4):
        closed = pt.lowdin_effective_hamiltonian(e0, v, sub, lam=0.8, order=order)
        np.testing.assert_allclose(closed, series[: order + 1].sum(0), atol=1e-13)
    np.testing.assert_allclose(
        pt.lowdin_effective_hamiltonian(e0, v, sub, lam=0.8, order=5), series.sum(0)
    )
    # a one-level "subspace" is the Rayleigh–Schrödinger series
    single = pt.effective_hamiltonian_series(e0, v, [9], 7)[:, 0, 0]
    np.testing.assert_allclose(single.real, pt.rs_energy_series(e0, v, 9, 7), atol=1e-12)


def test_effective_hamiltonian_series_sums_to_exact_levels():
    # internal consistency: inside the radius, the summed effective Hamiltonian has exactly
    # the eigenvalues of the full problem that belong to the subspace (checks every order of
    # the Bloch recursion and of its Hermitisation)
    rng = np.random.default_rng(12)
    e0 = np.array([0.0, 1.0, 2.5, 2.6, 2.75, 4.0, 5.0, 6.5])
    v = random_hermitian(rng, e0.size, 0.12)
    series = pt.effective_hamiltonian_series(e0, v, [2, 3, 4], 30)
    np.testing.assert_allclose(series, np.conj(np.swapaxes(series, 1, 2)), atol=1e-14)
    assert np.linalg.norm(series[30], 2) < 1e-12  # converged
    summed = np.linalg.eigvalsh(series.sum(axis=0))
    exact = np.linalg.eigvalsh(np.diag(e0) + v)[2:5]
    np.testing.assert_allclose(summed, exact, atol=1e-11)


def test_lowdin_rejects_incomplete_subspace():
    e0 = np.array([0.0, 1.0, 1.0, 2.0])
    v = random_hermitian(np.random.default_rng(1), 4, 0.1)
    with pytest.raises(ValueError, match="degenerate"):
        pt.lowdin_effective_hamiltonian(e0, v, [1])


# --------------------------------------------------------------------------------------------
# grouping
# --------------------------------------------------------------------------------------------


def test_group_levels_rules():
    thr = pt.DEFAULT_COUPLING_THRESHOLD
    e0 = np.array([0.0, 1.0, 1.1, 3.0, 3.0, 6.0])
    v = np.zeros((6, 6))
    v[1, 2] = v[2, 1] = 0.5 * thr * 0.1  # ratio 0.5 thr: separate
    v[0, 5] = v[5, 0] = 0.01
    labels = pt.group_levels(e0, v)
    assert labels[1] != labels[2]
    assert labels[3] == labels[4]  # degenerate, although uncoupled
    assert len(set(labels)) == 5
    v[1, 2] = v[2, 1] = 2.0 * thr * 0.1  # ratio 2 thr: joined
    labels = pt.group_levels(e0, v)
    assert labels[1] == labels[2]
    # transitive closure: 1-2 and 2-3 strongly coupled, 1-3 not
    v[2, 3] = v[3, 2] = 2.0 * thr * 1.9
    labels = pt.group_levels(e0, v, indirect=False)
    assert labels[1] == labels[2] == labels[3] == labels[4]
    assert labels[0] != labels[1] and labels[5] != labels[1]
    # a window: only the groups of the targets are labelled
    win = pt.group_levels(e0, v, targets=[0], indirect=False)
    assert win[0] == 0 and np.all(win[1:5] == -1)


def test_group_levels_indirect_coupling():
    # cosine lattice just off the zone centre: m = ±1 sit at (2 ± ν)², 8ν apart, and couple
    # only through m = 0 (second-order coupling q²/4, closed form); for q = 0.3, ν = 0.005:
    # ratio (q²/4)/(8ν) = 0.56 > threshold, so the indirect rule joins them.
    e0, v, m = mathieu(0.005, 6)
    pair = np.flatnonzero(np.abs(m) == 1)
    labels = pt.group_levels(e0, v, lam=0.3)
    assert labels[pair[0]] == labels[pair[1]]
    labels = pt.group_levels(e0, v, lam=0.3, indirect=False)
    assert labels[pair[0]] != labels[pair[1]]
    # batched call gives the same per row
    both = pt.group_levels(np.stack([e0, e0]), v, lam=0.3)
    assert np.array_equal(both[0], both[1])


def test_default_threshold_two_level_claim():
    # docstring claim of group_levels, from the two-level closed form
    # E = Δ/2 (1 - sqrt(1 + 4r²)) (any QM text, e.g. Sakurai & Napolitano 2011, §5.1): at the
    # default r = 0.1 second order is off by about r⁴Δ = 1e-4 Δ (1 % of the shift) and fourth
    # order by about 2 r⁶ Δ
    delta = 1.0
    r = pt.DEFAULT_COUPLING_THRESHOLD
    assert r == 0.1
    e0 = np.array([0.0, delta])
    v = np.array([[0.0, r * delta], [r * delta, 0.0]])
    exact = delta / 2 * (1 - np.sqrt(1 + 4 * r**2))
    errors = []
    for order in (2, 4):
        res = pt.perturbative_levels(e0, v, 1, order=order)
        assert res.treatment[0] == pt.TREATMENT_NONDEGENERATE  # ratio equal to threshold
        errors.append(abs(res.energies[0] - exact))
        assert errors[-1] <= res.error_estimate[0]
    assert errors[0] == pytest.approx(r**4 * delta, rel=0.05)
    assert errors[0] / abs(exact) == pytest.approx(0.0099, abs=0.0005)
    assert errors[1] == pytest.approx(2 * r**6 * delta, rel=0.1)


# --------------------------------------------------------------------------------------------
# the batched driver
# --------------------------------------------------------------------------------------------


def test_driver_error_estimate_on_random_weak_problems():
    # internal consistency against exact diagonalisation: the estimate must exceed the true
    # error on >= 90 % of levels, without being uselessly large
    rng = np.random.default_rng(10)
    covered, ratios = [], []
    for trial in range(40):
        n = 24
        e0 = rng.uniform(0.0, 8.0, n)
        v = random_hermitian(rng, n, rng.uniform(0.02, 0.15), complex_=bool(trial % 2))
        for order in (1, 2, 3):
            res = pt.perturbative_levels(e0, v, 6, order=order)
            err = np.abs(res.energies - exact_lowest(e0, v, 6))
            covered.append(err <= res.error_estimate + 1e-12)
            big = err > 1e-10
            ratios.append(res.error_estimate[big] / err[big])
    assert np.mean(np.concatenate(covered)) >= 0.9
    assert np.median(np.concatenate(ratios)) < 30.0


def test_driver_batched_free_electron():
    rng = np.random.default_rng(11)
    e0, v = free_electron_batch(60, 60, rng, 0.04, cplx=True)
    res = pt.perturbative_levels(e0, v, 8)
    assert res.energies.shape == (60, 8)
    exact = exact_lowest(e0, v, 8)
    err = np.abs(res.energies - exact)
    assert np.mean(err <= res.error_estimate + 1e-12) >= 0.9
    assert np.all(np.diff(res.energies, axis=1) >= 0)
    assert np.all(err < 0.05)
    assert set(np.unique(res.treatment)) == {0, 1}  # both treatments occur
    assert np.all(res.group_size[res.treatment == pt.TREATMENT_NONDEGENERATE] == 1)
    assert np.all(res.group_size[res.treatment == pt.TREATMENT_SUBSPACE] >= 2)
    # shared and per-row V give the same answer; unbatched rows agree with the batch
    per_row = pt.perturbative_levels(e0[:5], np.broadcast_to(v, (5, *v.shape)), 8)
    np.testing.assert_allclose(per_row.energies, res.energies[:5], atol=1e-12)
    one = pt.perturbative_levels(e0[7], v, 8)
    np.testing.assert_allclose(one.energies, res.energies[7], atol=1e-12)
    small_chunks = pt.perturbative_levels(e0, v, 8, chunk_size=7)
    np.testing.assert_allclose(small_chunks.energies, res.energies, atol=1e-12)
    for order in (1, 2, 3):
        full = pt.perturbative_levels(e0, v, 8, order=order)
        fast = pt.perturbative_levels(e0, v, 8, order=order, estimate_error=False)
        np.testing.assert_allclose(fast.energies, full.energies, atol=1e-12)
        assert np.all(np.isnan(fast.error_estimate))


def test_driver_subspace_estimate_definition():
    # internal consistency: the driver's subspace energies and error estimate are those of
    # effective_hamiltonian_series for the same group, ε = max(2, 1/(1 - ρ)) |E(4) - E(2)|
    # per eigenvalue, ρ = sqrt(t4/t2) with t_j the spectral norm of the order-j term
    rng = np.random.default_rng(13)
    e0 = np.array([0.0, 1.0, 1.04, 1.1, 2.5, 3.0, 3.2, 4.0, 5.0])
    v = random_hermitian(rng, e0.size, 0.05)
    res = pt.perturbative_levels(e0, v, 4, order=2, coupling_threshold=0.25)
    assert list(res.treatment) == [0, 1, 1, 1]
    series = pt.effective_hamiltonian_series(e0, v, [1, 2, 3], 4)
    t = [np.linalg.norm(h, 2) for h in series]
    rho = min(0.9, np.sqrt(t[4] / t[2]))
    step = np.abs(np.linalg.eigvalsh(series.sum(0)) - np.linalg.eigvalsh(series[:3].sum(0)))
    np.testing.assert_allclose(res.error_estimate[1:], max(2.0, 1 / (1 - rho)) * step,
                               rtol=1e-10)
    np.testing.assert_allclose(res.energies[1:], np.linalg.eigvalsh(series[:3].sum(0)),
                               atol=1e-13)
    # the same rows computed along the two internal routes (with and without the grouping
    # products reused) agree wherever the grouping is the same
    e0b, vb = free_electron_batch(30, 50, rng, 0.03, cplx=True)
    a = pt.perturbative_levels(e0b, vb, 8, order=2, indirect=True)
    b = pt.perturbative_levels(e0b, vb, 8, order=2, indirect=False)
    same = np.all(a.group_size == b.group_size, axis=1) & np.all(a.treatment == b.treatment, 1)
    assert same.sum() >= 10 and np.any(a.treatment[same] == pt.TREATMENT_SUBSPACE)
    np.testing.assert_allclose(a.energies[same], b.energies[same], atol=1e-12)
    np.testing.assert_allclose(a.error_estimate[same], b.error_estimate[same], rtol=1e-9)


def test_driver_group_reaching_outside_window():
    # levels 2 (target) and 3 (outside a 3-level window, buffer 0) are strongly coupled, so
    # the subspace includes level 3; the pair's lower eigenvalue is kept, the upper dropped.
    e0 = np.array([0.0, 1.0, 2.0, 2.05, 5.0])
    v = np.zeros((5, 5))
    v[2, 3] = v[3, 2] = 0.1
    v[0, 4] = v[4, 0] = 0.05
    res = pt.perturbative_levels(e0, v, 3, buffer_levels=0, order=2, coupling_threshold=0.25)
    np.testing.assert_allclose(res.energies, exact_lowest(e0, v, 3), atol=1e-6)
    assert list(res.treatment) == [0, 0, 1]
    assert res.group_size[2] == 2
    # A level starting above the window that ends below its top is found via the buffer:
    # level 2 (1.30) is pushed up by level 0 (+0.3²/1.3 ≈ +0.069), level 3 (1.32) down by
    # level 4 (-0.065²/0.28 ≈ -0.015); no coupling ratio exceeds the threshold.
    e0 = np.array([0.0, 1.0, 1.30, 1.32, 1.6])
    v = np.zeros((5, 5))
    v[2, 0] = v[0, 2] = 0.3
    v[3, 4] = v[4, 3] = 0.065
    exact = exact_lowest(e0, v, 3)
    res = pt.perturbative_levels(e0, v, 3, buffer_levels=1, order=2, coupling_threshold=0.25)
    assert np.all(res.treatment == pt.TREATMENT_NONDEGENERATE)
    np.testing.assert_allclose(res.energies, exact, atol=5e-3)
    unbuffered = pt.perturbative_levels(e0, v, 3, buffer_levels=0, order=2)
    assert abs(unbuffered.energies[2] - exact[2]) > 0.05  # found level 2, missed level 3


def test_driver_coupling_ratios():
    # max_coupling_ratio by hand: level 0 couples to 1 (0.1/1) and 3 (0.15/3); the group
    # {1, 2} (ratio 0.05/0.02 inside) couples out via 1-0 (0.1) and 2-3 (0.2/1.98)
    e0 = np.array([0.0, 1.0, 1.02, 3.0])
    v = np.zeros((4, 4))
    for (i, j), x in {(0, 1): 0.1, (1, 2): 0.05, (2, 3): 0.2, (0, 3): 0.15}.items():
        v[i, j] = v[j, i] = x
    res = pt.perturbative_levels(e0, v, 3, order=2, coupling_threshold=0.25)
    assert list(res.treatment) == [0, 1, 1]
    np.testing.assert_allclose(res.max_coupling_ratio, [0.1, 0.2 / 1.98, 0.2 / 1.98])
    err = np.abs(res.energies - exact_lowest(e0, v, 3))
    assert np.all(err <= res.error_estimate) and np.all(err < 5e-3)


def test_driver_indirect_coupling_near_zone_centre():
    # Cosine lattice at ν = 0.005 (Mathieu units): m = ±1 lie 8ν = 0.04 apart and couple only
    # through m = 0 (second-order coupling q²/4 = 0.0225 at q = 0.3). The non-degenerate
    # series is poor there (its fourth order has (q²/4)²/(8ν) in it); the driver must group
    # the pair (indirect rule) and stay accurate; internal consistency vs eigvalsh.
    e0, v, _ = mathieu(0.005, 10)
    q = 0.3
    res = pt.perturbative_levels(e0, v, 3, lam=q, order=2)
    assert list(res.treatment) == [0, 1, 1]
    err = np.abs(res.energies - exact_lowest(e0, v, 3, lam=q))
    assert np.all(err <= res.error_estimate)
    assert np.all(err[1:] < 1e-3)  # an O(q⁴) error, like that of a0
    plain = pt.perturbative_levels(e0, v, 3, lam=q, order=2, indirect=False)
    assert list(plain.treatment) == [0, 0, 0]
    plain_err = np.abs(plain.energies - exact_lowest(e0, v, 3, lam=q))
    assert plain_err[1:].max() > 10 * err[1:].max()


def test_driver_exact_degeneracies_are_finite():
    # 1D free electrons at the zone centre: (2m)² is doubly degenerate for m != 0
    e0, v, _ = mathieu(0.0, 8)
    batch = np.stack([e0, e0, (np.arange(-8, 9) * 2.0 + 1.0) ** 2])
    for order in (0, 1, 2, 3, 4):
        res = pt.perturbative_levels(batch, 0.2 * v, 7, order=order)
        for field in (res.energies, res.error_estimate, res.max_coupling_ratio):
            assert np.all(np.isfinite(field))
        assert np.all(res.treatment[:, 1:] == pt.TREATMENT_SUBSPACE)
    zero_v = pt.perturbative_levels(batch, np.zeros_like(v), 5)
    np.testing.assert_allclose(zero_v.energies, np.sort(batch, axis=1)[:, :5])
    assert np.all(zero_v.error_estimate == 0.0)


def test_driver_input_checks():
    e0 = np.array([0.0, 1.0, 2.0])
    v = np.array([[0.0, 1.0, 0.0], [0.5, 0.0, 0.0], [0.0, 0.0, 0.0]])
    with pytest.raises(ValueError, match="Hermitian"):
        pt.perturbative_levels(e0, v, 2)
    with pytest.raises(ValueError, match="n_levels"):
        pt.perturbative_levels(e0, np.zeros((3, 3)), 4)
    with pytest.raises(ValueError, match="shape"):
        pt.perturbative_levels(e0, np.zeros((2, 2)), 1)
    assert pt.TREATMENT_NAMES[pt.TREATMENT_NONDEGENERATE] == "non-degenerate"
    assert pt.TREATMENT_NAMES[pt.TREATMENT_SUBSPACE] == "subspace"


# --------------------------------------------------------------------------------------------
# properties (hypothesis)
# --------------------------------------------------------------------------------------------

PROPS = settings(max_examples=40, deadline=None,
                 suppress_health_check=[HealthCheck.too_slow])


@st.composite
def problems(draw, min_n: int = 3, max_n: int = 9):
    """Random Hermitian problem with possible exact degeneracies (levels on a coarse grid)."""
    n = draw(st.integers(min_n, max_n))
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    e0 = rng.integers(0, 2 * n, size=n) * 0.5 + draw(st.sampled_from([0.0, 0.01]))
    v = random_hermitian(rng, n, draw(st.floats(0.01, 0.2)), complex_=draw(st.booleans()))
    return e0, v


@PROPS
@given(problems(), st.integers(1, 3))
def test_property_small_coupling_tends_to_e0(problem, order):
    e0, v = problem
    res = pt.perturbative_levels(e0, v, min(4, e0.size), lam=1e-7, order=order)
    np.testing.assert_allclose(res.energies, np.sort(e0)[: min(4, e0.size)], atol=1e-6)


@PROPS
@given(problems(), st.integers(1, 4))
def test_property_effective_hamiltonian_hermitian(problem, order):
    e0, v = problem
    first = np.argsort(e0, kind="stable")[0]
    sub = np.flatnonzero(np.abs(e0 - e0[first]) <= pt.DEFAULT_DEGENERACY_TOL)
    if sub.size == e0.size:
        return
    h = pt.lowdin_effective_hamiltonian(e0, v, sub, order=order)
    np.testing.assert_allclose(h, h.conj().T, atol=1e-13)
    terms = pt.effective_hamiltonian_series(e0, v, sub, order)
    np.testing.assert_allclose(terms, np.conj(np.swapaxes(terms, 1, 2)), atol=1e-13)


@PROPS
@given(st.integers(2, 4), st.integers(0, 3), st.integers(0, 2**31 - 1), st.booleans())
def test_property_first_order_degenerate_block(g, n_other, seed, cplx):
    # an exactly degenerate group, well separated from the rest: order 1 = eig(e0 + PVP)
    rng = np.random.default_rng(seed)
    e0 = np.concatenate([np.full(g, 1.0), 3.0 + 2.0 * np.arange(n_other)])
    v = random_hermitian(rng, e0.size, 0.1, cplx)
    res = pt.perturbative_levels(e0, v, g, order=1, coupling_threshold=0.25)
    block = np.linalg.eigvalsh(np.diag(e0[:g]) + v[:g, :g])
    np.testing.assert_allclose(res.energies, block, atol=1e-12)
    assert np.all(res.treatment == pt.TREATMENT_SUBSPACE)


@PROPS
@given(problems(), st.floats(-50.0, 50.0), st.integers(1, 3))
def test_property_common_shift(problem, shift, order):
    e0, v = problem
    k = min(4, e0.size)
    a = pt.perturbative_levels(e0, v, k, order=order)
    b = pt.perturbative_levels(e0 + shift, v, k, order=order)
    np.testing.assert_allclose(b.energies, a.energies + shift, atol=1e-9)
    np.testing.assert_allclose(b.error_estimate, a.error_estimate, rtol=1e-6, atol=1e-9)
    assert np.array_equal(a.treatment, b.treatment)


@PROPS
@given(problems(), st.integers(0, 2**31 - 1), st.integers(1, 3))
def test_property_basis_permutation(problem, seed, order):
    e0, v = problem
    perm = np.random.default_rng(seed).permutation(e0.size)
    k = min(4, e0.size)
    a = pt.perturbative_levels(e0, v, k, order=order)
    b = pt.perturbative_levels(e0[perm], v[np.ix_(perm, perm)], k, order=order)
    np.testing.assert_allclose(b.energies, a.energies, atol=1e-10)
    np.testing.assert_allclose(b.error_estimate, a.error_estimate, rtol=1e-6, atol=1e-10)
    assert np.array_equal(np.sort(a.group_size), np.sort(b.group_size))
