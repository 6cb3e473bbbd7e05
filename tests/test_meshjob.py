"""Dense k-mesh jobs: energies on the irreducible mesh over the engine, DOS and Fermi level."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled, make_material

from bandpert.crystal.kmesh import reciprocal_mesh
from bandpert.errors import InputError
from bandpert.physics.dos import DEFAULT_SMEARING_EV, fermi_level_from_count
from bandpert.planewave.model import build_k_centred_model
from bandpert.planewave.solver import exact_energies
from bandpert.runs.execution import Engine
from bandpert.runs.mesh_dos import compute_dos, mesh_energies
from bandpert.units import HBAR2_OVER_2M0_EV_A2


@pytest.fixture(scope="module")
def aluminium():
    return bundled("aluminium")


@pytest.fixture(scope="module")
def al_dos(aluminium):
    return compute_dos(aluminium, 14, n_bands=6)


def test_serial_and_distributed_dos_agree(aluminium, al_dos, dask_scheduler):
    # The sweep issue: results independent of how they ran (1e-10 eV); here the whole DOS.
    spread = compute_dos(aluminium, 14, n_bands=6,
                         engine=Engine("scheduler", address=dask_scheduler))
    assert np.allclose(spread.energies_eV, al_dos.energies_eV, rtol=0, atol=1e-10)
    assert np.allclose(spread.dos.dos_per_eV, al_dos.dos.dos_per_eV, rtol=0, atol=1e-8)
    assert abs(spread.fermi_level_eV - al_dos.fermi_level_eV) < 1e-10


def test_blocks_of_the_mesh_come_back_in_order(aluminium):
    mesh = reciprocal_mesh(aluminium, 6)
    cutoff = 120.0
    whole = mesh_energies(aluminium, mesh, cutoff, 4, block_size=10_000)
    pieces = mesh_energies(aluminium, mesh, cutoff, 4, block_size=3)
    assert np.array_equal(whole, pieces)


def test_aluminium_fermi_energy_from_the_band_bottom(al_dos):
    # Aluminium as a free-electron metal with 3 electrons per atom: E_F = 11.7 eV above the
    # band bottom (Ashcroft & Mermin, Solid State Physics (1976), Table 2.1). The weak
    # pseudopotential (Ashcroft 1963 form factors) keeps the occupied width within 0.3 eV.
    bottom = al_dos.energies_eV[:, 0].min()
    assert al_dos.fermi_level_eV - bottom == pytest.approx(11.7, abs=0.3)
    assert al_dos.energy_zero_kind == "Fermi level" and al_dos.gap_eV is None


def test_tetrahedron_and_gaussian_fermi_levels_agree(aluminium, al_dos):
    # Two integrations of the same bands (common practice, no source). On a 14³ mesh a
    # σ = 0.05 eV Gaussian still carries a sampling error of some tens of meV; the tetrahedra
    # converge faster, which is why they are the default.
    mesh = reciprocal_mesh(aluminium, 14)
    e = exact_energies(build_k_centred_model(aluminium, al_dos.cutoff_eV), mesh.k_cart_invA, 6)
    assert np.allclose(e, al_dos.energies_eV, atol=1e-10)
    gauss = compute_dos(aluminium, 14, method="gaussian", n_bands=6)
    assert gauss.dos.smearing_eV == DEFAULT_SMEARING_EV
    assert gauss.fermi_level_eV == pytest.approx(
        fermi_level_from_count(mesh, e, 3, method="gaussian"), abs=1e-9)
    assert abs(gauss.fermi_level_eV - al_dos.fermi_level_eV) < 0.08


def test_silicon_dos_has_the_gap_and_the_zero_at_the_valence_top():
    si = bundled("silicon")
    r = compute_dos(si, 8, n_bands=8, cutoff_eV=110.0)
    assert r.energy_zero_kind == "valence-band maximum"
    assert r.energy_zero_eV == pytest.approx(r.valence_max_eV)
    assert r.valence_max_eV < r.fermi_level_eV < r.conduction_min_eV
    inside = (r.dos.energies_eV > r.valence_max_eV + 0.02) & (
        r.dos.energies_eV < r.conduction_min_eV - 0.02)
    assert inside.any() and np.all(r.dos.dos_per_eV[inside] < 1e-12)
    # 8 electrons fill the four valence bands: the count in the gap is 8 (both spins)
    assert np.allclose(r.dos.integrated[inside], 8.0, atol=1e-9)


def test_free_electron_fermi_energy_of_the_empty_fcc_lattice():
    # Aluminium as a free-electron metal, 3 electrons per atom at a = 4.05 Å: E_F = 11.7 eV
    # (Ashcroft & Mermin (1976), Table 2.1); analytic ħ²(3π²n)^{2/3}/2m with n = 12/a³.
    empty = make_material({"type": "fcc", "a_A": 4.05}, [{"species": "Al",
                           "position": [0, 0, 0]}], {"form": "empty"},
                          electrons={"valence": 3}, basis={"cutoff_eV": 100.0})
    r = compute_dos(empty, 16, n_bands=8)
    analytic = HBAR2_OVER_2M0_EV_A2 * (3 * np.pi**2 * 12 / 4.05**3) ** (2 / 3)
    assert r.fermi_level_eV == pytest.approx(11.7, abs=0.06)
    # linear tetrahedra converge as 1/n²: +47 meV at 16³, +20 at 24³, +8 at 32³ (measured)
    assert 0 < r.fermi_level_eV - analytic < 0.06


def test_bad_dos_requests_are_user_errors(aluminium):
    with pytest.raises(InputError) as exc:
        compute_dos(aluminium, 6, method="histogram")
    assert exc.value.key == "method"
    with pytest.raises(InputError) as exc:
        compute_dos(aluminium, 6, energy_step_eV=0.0)
    assert exc.value.key == "energy_step_eV"
