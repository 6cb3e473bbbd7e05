"""Perturbative bands of plane-wave models against exact diagonalisation and exact solutions."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.special
from conftest import bundled, make_material

from bandpert.perturbation import TREATMENT_SUBSPACE
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.perturbative_bands import PerturbationSettings, compare, perturbative_bands
from bandpert.planewave.model import build_model
from bandpert.units import HBAR2_OVER_2M0_EV_A2

SETTINGS = PerturbationSettings(radius_points=0)


@pytest.fixture(scope="module")
def aluminium():
    return compute_band_structure(bundled("aluminium"), n_k=200, perturbation=SETTINGS)


@pytest.fixture(scope="module")
def silicon_pert():
    return compute_band_structure(bundled("silicon"), n_k=120, perturbation=SETTINGS)


def test_aluminium_second_order_trustworthy_points_within_5_meV(aluminium):
    # Reference: exact diagonalisation of the same H(k) (LAPACK through scipy.linalg.eigh).
    # Target of the project: second order within 5 meV on every point marked trustworthy, and
    # at least half of all (band, k) points marked so (common practice, no source).
    # The mark now rests on a proven bound: measured 80.4 % trusted (57.8 % with the earlier
    # two-more-orders rule), of the 80.4 % of points that are within 5 meV at all.
    c = aluminium.comparison
    assert aluminium.perturbative.settings.order == 2
    assert c.trustworthy_fraction >= 0.5
    assert c.trustworthy_fraction >= 0.97 * np.mean(c.abs_error_eV < 0.005)
    assert c.max_error_trustworthy_eV <= 0.005
    assert c.over_tolerance_trustworthy == 0
    assert c.bound_coverage == 1.0


def test_error_estimate_bounds_the_true_error_on_the_great_majority(aluminium):
    # The estimate must cover |E_pert - E_exact| on the great majority of points (exact
    # diagonalisation as reference; common practice, no source).
    assert aluminium.comparison.estimate_coverage >= 0.95
    square = compute_band_structure(bundled("square-demo"), n_k=150, perturbation=SETTINGS)
    assert square.comparison.estimate_coverage >= 0.95


def test_coupling_ratio_alone_would_pass_wrong_points(aluminium):
    # Why the mark comes from the error estimate: points whose coupling ratio is below the
    # threshold can still be tens of meV off (measured against exact diagonalisation).
    pb = aluminium.perturbative
    err = aluminium.comparison.abs_error_eV
    ratio_ok = pb.max_coupling_ratio <= pb.settings.coupling_threshold
    assert np.max(err[ratio_ok]) > 0.020
    assert np.max(err[pb.trustworthy]) <= 0.005


def test_switch_to_subspace_at_zone_boundary_crossings(aluminium):
    # At X and L the free-electron levels k and k - G are degenerate (source: Ashcroft & Mermin
    # 1976,
    # ch. 9): the treatment there must be the subspace one, and the error stays bounded.
    bs = aluminium
    for label in ("X", "L"):
        i = bs.path.label_indices[list(bs.path.labels).index(label)]
        assert bs.perturbative.treatment[i, 0] == TREATMENT_SUBSPACE
        assert bs.perturbative.group_size[i, 0] >= 2
        assert bs.comparison.abs_error_eV[i].max() < 0.02
    assert np.all(np.isfinite(bs.perturbative.energies_eV))
    assert bs.comparison.abs_error_eV.max() < 0.2


def test_silicon_validity_map_marks_the_failure(silicon_pert):
    # The 1966 silicon potential is strong (|V(111)| ≈ 2 eV against kinetic spacings of a few
    # eV): second-order theory fails over most of the zone, and the map must say so while
    # never vouching for a wrong point (exact diagonalisation as reference).
    c = silicon_pert.comparison
    assert c.trustworthy_fraction < 0.1
    assert c.max_error_trustworthy_eV is None or c.max_error_trustworthy_eV <= 0.005
    assert c.bound_coverage == 1.0
    assert np.median(c.abs_error_eV) > 0.01
    assert c.estimate_coverage >= 0.9


@pytest.mark.parametrize("q", [0.05, 0.2])
def test_cosine_chain_band_edges_within_the_error_estimate(q):
    # Source: Exact band edges E_R a_r(q), E_R b_r(q): Abramowitz & Stegun (1964), ch. 20, through
    # scipy.special.mathieu_a / mathieu_b.
    a = 4.0
    e_r = HBAR2_OVER_2M0_EV_A2 * (np.pi / a) ** 2
    material = make_material({"type": "chain", "a_A": a}, [{"species": "X", "position": [0.0]}],
                             {"form": "fourier", "unit": "eV",
                              "coefficients": [{"miller": [1], "value": q * e_r}]})
    model = build_model(material, e_r * 30.0**2)
    k = np.array([[0.0], [np.pi / a]])
    pb = perturbative_bands(model, k, 4, PerturbationSettings(order=2, radius_points=0))
    exact = np.array([sorted([scipy.special.mathieu_a(0, q), scipy.special.mathieu_b(2, q),
                              scipy.special.mathieu_a(2, q), scipy.special.mathieu_b(4, q)]),
                      sorted([scipy.special.mathieu_b(1, q), scipy.special.mathieu_a(1, q),
                              scipy.special.mathieu_b(3, q), scipy.special.mathieu_a(3, q)])])
    err = np.abs(pb.energies_eV / e_r - exact) * e_r
    assert np.all(err <= pb.error_estimate_eV + 1e-12)
    # the zone-boundary pair is degenerate: subspace treatment, first gap ≈ 2|V1| = 2q E_R
    assert np.all(pb.treatment[1, :2] == TREATMENT_SUBSPACE)
    gap = (pb.energies_eV[1, 1] - pb.energies_eV[1, 0]) / e_r
    assert gap == pytest.approx(2 * q, rel=0.05)


def test_cosine_chain_convergence_radius_at_zone_centre():
    # a0(q) has its nearest branch points at q = ±1.4688 i (Mulholland & Goldstein, Phil. Mag. 8,
    # 834 (1929); Meixner & Schäfke, Mathieusche Funktionen (1954); from memory). With
    # V1 = q E_R the series in λ of the lowest level at k = 0 has radius 1.4688/q.
    q, a = 0.3, 4.0
    e_r = HBAR2_OVER_2M0_EV_A2 * (np.pi / a) ** 2
    material = make_material({"type": "chain", "a_A": a}, [{"species": "X", "position": [0.0]}],
                             {"form": "fourier", "unit": "eV",
                              "coefficients": [{"miller": [1], "value": q * e_r}]})
    model = build_model(material, e_r * 20.0**2)
    pb = perturbative_bands(model, np.zeros((1, 1)), 2, PerturbationSettings(radius_points=1),
                            label_indices=np.array([0]))
    assert pb.treatment[0, 0] == 0  # q/4 = 0.075 < threshold: non-degenerate series
    assert pb.convergence_radius[0, 0] == pytest.approx(1.4688 / q, rel=0.05)


def test_weak_potential_limit_is_exact_to_the_order():
    # λ → 0: the perturbative bands approach the exact ones faster than λ² at second order
    # (Rayleigh–Schrödinger error O(λ³); source: Sakurai & Napolitano 2011, §5.1).
    material = bundled("aluminium")
    model = build_model(material, 120.0)
    k = np.random.default_rng(3).uniform(-0.4, 0.4, size=(6, 3)) @ model.reciprocal_invA
    from bandpert.planewave.solver import exact_energies

    errors = []
    for lam in (0.1, 0.05):
        s = PerturbationSettings(lam=lam, radius_points=0)
        scaled = type(model)(model.basis, model.reciprocal_invA, model.potential_eV * lam)
        ex = exact_energies(scaled, k, 4)
        errors.append(np.abs(perturbative_bands(model, k, 4, s).energies_eV - ex).max())
    assert errors[1] < errors[0] / 4


def test_no_exact_run_gives_the_same_perturbative_bands():
    a = compute_band_structure(bundled("square-demo"), n_k=40, perturbation=SETTINGS)
    b = compute_band_structure(bundled("square-demo"), n_k=40, perturbation=SETTINGS,
                               exact=False)
    assert b.energies_eV is None and b.comparison is None
    assert np.allclose(a.perturbative.energies_eV, b.perturbative.energies_eV)
    # the Fermi level from perturbative mesh energies lies near the exact one
    assert b.energy_zero_eV == pytest.approx(a.energy_zero_eV, abs=0.05)
    assert compare(a.energies_eV, a.perturbative).trustworthy_fraction == pytest.approx(
        a.comparison.trustworthy_fraction)
