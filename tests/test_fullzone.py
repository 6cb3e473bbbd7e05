"""Full-zone k·p from the Γ eigenstates of silicon against the exact plane-wave bands."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled

from bandpert.physics.bands import compute_band_structure
from bandpert.physics.fullzone import (
    DEFAULT_BASIS_SIZES,
    MULTIPLET_TOL_EV,
    close_multiplets,
    kp_basis_energies,
    kp_convergence,
)
from bandpert.planewave.solver import exact_energies


@pytest.fixture(scope="module")
def silicon():
    return compute_band_structure(bundled("silicon"), n_k=60)


def test_full_basis_is_exact(silicon):
    # With every eigenstate of H(Γ) kept the k·p Hamiltonian is a unitary transform of the
    # plane-wave H(k) (source: Cardona & Pollak, Phys. Rev. 142, 530 (1966), eq. 2), so the bands
    # agree
    # with exact diagonalisation to rounding.
    e = kp_basis_energies(silicon.model, np.zeros(3), silicon.model.size,
                          silicon.path.k_cart_invA, 8)
    same_basis = exact_energies(silicon.model, silicon.path.k_cart_invA, 8)
    assert np.abs(e - same_basis).max() < 1e-8


@pytest.fixture(scope="module")
def convergence(silicon):
    return kp_convergence(silicon.model, np.zeros(3), silicon.path.k_cart_invA, 8,
                          basis_sizes=(15, 30, 60, 120))


def test_bands_converge_as_the_basis_grows(silicon, convergence):
    # Convergence curve of the full-zone method (source: Cardona & Pollak 1966): errors fall as more
    # Γ states are kept; at Γ itself every truncation is exact.
    c = convergence
    # 30 and 120 cut Γ multiplets (levels 29–31 and 120–121 are degenerate) and are rounded up
    assert list(c.basis_sizes) == [15, 31, 60, 121, silicon.model.size]
    assert list(c.rounded_sizes) == [15, 31, 60, 121]
    assert np.all(np.diff(c.max_error_eV) < 0)
    assert c.max_error_eV[2] < 0.05 and c.max_error_eV[3] < 0.005
    gamma = silicon.path.label_indices[0]
    assert np.abs(c.energies_eV[:, gamma] - silicon.energies_eV[gamma]).max() < 1e-9


def test_default_sizes_close_the_gamma_multiplets(silicon):
    # Every kept set of Γ states must be a union of whole levels; the spinless levels of the
    # cubic group O_h are 1-, 2- or 3-fold (source: Bouckaert, Smoluchowski & Wigner, Phys. Rev.
    # 50, 58 (1936), the Γ irreducible representations), so each closed size ends a multiplet of
    # 1, 2 or 3 states.
    model = silicon.model
    levels = exact_energies(model, np.zeros((1, 3)), model.size)[0]
    sizes = close_multiplets(levels, DEFAULT_BASIS_SIZES)
    assert np.all(sizes >= DEFAULT_BASIS_SIZES)
    for n in sizes:
        assert levels[n] - levels[n - 1] > MULTIPLET_TOL_EV
        last = np.flatnonzero(np.abs(levels[:n] - levels[n - 1]) < MULTIPLET_TOL_EV)
        assert last.size in (1, 2, 3)
    # a size already on a boundary is kept; the whole basis is its own end
    assert close_multiplets(levels, [1, model.size]).tolist() == [1, model.size]


def test_close_multiplets_on_a_made_up_spectrum():
    # common practice, no source: a threefold level at 1 eV and a twofold one at 3 eV
    levels = np.array([0.0, 1.0, 1.0, 1.0, 2.0, 3.0, 3.0 + 1e-9, 4.0])
    assert close_multiplets(levels, [1, 2, 3, 4, 5, 6, 7, 8]).tolist() == [1, 4, 4, 4, 5, 7, 7, 8]


def test_equivalent_delta_points_agree_with_closed_sizes(silicon):
    # Cubic symmetry: the six Δ points (±½, 0, 0), (0, ±½, 0), (0, 0, ±½)·2π/a are equivalent
    # and carry the same levels (source: Bouckaert, Smoluchowski & Wigner 1936, the star of Δ).
    # With closed sizes the full-zone k·p bands agree to rounding; 30 states cut the triplet at
    # 54.46 eV and split them by about 4 meV, which this test would catch.
    model = silicon.model
    a = bundled("silicon").a_A
    star = 0.5 * 2 * np.pi / a * np.vstack([np.eye(3), -np.eye(3)])
    levels = exact_energies(model, np.zeros((1, 3)), model.size)[0]
    for n in close_multiplets(levels, DEFAULT_BASIS_SIZES):
        e = kp_basis_energies(model, np.zeros(3), int(n), star, 8)
        assert np.ptp(e, axis=0).max() < 1e-8
    cut = kp_basis_energies(model, np.zeros(3), 30, star, 8)
    assert np.ptp(cut, axis=0).max() > 1e-3


def test_the_shown_size_is_visible_beside_the_exact_bands(convergence):
    # common practice, no source: the figure's truncated basis differs visibly (≥ 50 meV) from
    # the exact bands, unlike a converged one that would overlay them
    c = convergence
    assert c.shown_index < len(c.basis_sizes) - 1
    assert c.max_error_eV[c.shown_index] >= 0.05
    assert np.all(c.max_error_eV[c.shown_index + 1:-1] < 0.05)
