"""Full-zone k·p from the Γ eigenstates of silicon against the exact plane-wave bands."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled

from bandpert.physics.bands import compute_band_structure
from bandpert.physics.fullzone import kp_basis_energies, kp_convergence


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
    assert np.abs(e - silicon.energies_eV).max() < 1e-8


def test_bands_converge_as_the_basis_grows(silicon):
    # Convergence curve of the full-zone method (source: Cardona & Pollak 1966): errors fall as more
    # Γ states are kept; at Γ itself every truncation is exact.
    c = kp_convergence(silicon.model, np.zeros(3), silicon.path.k_cart_invA, 8,
                       basis_sizes=(15, 30, 60, 120), exact_eV=silicon.energies_eV)
    assert list(c.basis_sizes) == [15, 30, 60, 120, silicon.model.size]
    assert np.all(np.diff(c.max_error_eV) < 0)
    assert c.max_error_eV[2] < 0.05 and c.max_error_eV[3] < 0.005
    gamma = silicon.path.label_indices[0]
    assert np.abs(c.energies_eV[:, gamma] - silicon.energies_eV[gamma]).max() < 1e-9
