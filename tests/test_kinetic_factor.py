"""The kinetic factor β of H0 = β ħ²|k+G|²/2m0 (``potential.kinetic_factor``).

Every check uses one exact identity (algebra, common practice, no source): on a fixed set of
plane waves

    β ħ²|k+G|²/2m0 + V = β (ħ²|k+G|²/2m0 + V/β),

so a model with kinetic factor β and potential V (form factors, spin–orbit strengths and
nonlocal well depths: every term linear in an energy) has exactly β times the energies of the
β = 1 model with V/β, the same eigenvectors, β times every curvature (m0/m*, Luttinger
parameters) and β times every strain response. Each consumer that builds a velocity or a
curvature from the kinetic term analytically is checked against it, so one that forgets β fails.
The scaling itself is the kinetic-energy scaling of L.-W. Wang & A. Zunger, Phys. Rev. B 51,
17398 (1995) (from memory).
"""

from __future__ import annotations

import copy

import numpy as np
import pytest

from bandpert.data import find_material
from bandpert.errors import InputError
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.critical_points import classify
from bandpert.physics.deformation import strain_hamiltonian
from bandpert.physics.degenerate_edge import effective_hamiltonian_in_q
from bandpert.physics.fullzone import kp_basis_energies
from bandpert.physics.mass_tensor import (
    eigenstates,
    finite_difference_inverse_mass,
    inverse_mass_tensor,
)
from bandpert.physics.nfe_gaps import gap_analysis
from bandpert.physics.perturbative_bands import PerturbationSettings
from bandpert.physics.spinor_sos import gamma8_luttinger_sum_over_states
from bandpert.physics.van_hove import label_and_classify
from bandpert.planewave.formfactor import continuous_document
from bandpert.planewave.model import build_k_centred_model, build_model, centred_model
from bandpert.planewave.solver import exact_energies
from bandpert.units import HBAR2_OVER_2M0_EV_A2

BETA = 1.13


def _pair(name: str, beta: float = BETA) -> tuple:
    """(material with β and V, material with 1 and V/β) from a bundled file."""
    path = find_material(name, "planewave")
    doc = read_toml_document(path)
    scaled = copy.deepcopy(doc)
    doc["potential"]["kinetic_factor"] = beta
    pot = scaled["potential"]
    pot["kinetic_factor"] = 1.0  # a bundled file may carry its own β
    for key in ("symmetric", "antisymmetric"):
        if key in pot:
            pot[key] = [v / beta for v in pot[key]]
    for table in scaled.get("spin_orbit", {}).get("species", {}).values():
        table["strength_eV"] /= beta
    for table in scaled.get("nonlocal", {}).get("species", {}).values():
        for key in ("A0_eV", "A2_eV"):
            if key in table:
                table[key] /= beta
    return parse_material(doc, str(path)), parse_material(scaled, str(path))


@pytest.fixture(scope="module")
def silicon():
    return _pair("silicon")


def test_default_is_one_and_range_is_checked():
    path = find_material("silicon", "planewave")
    doc = read_toml_document(path)
    assert parse_material(doc, str(path)).potential.kinetic_factor == 1.0
    for bad in (0.2, 3.0, "1.1"):
        doc["potential"]["kinetic_factor"] = bad
        with pytest.raises(InputError, match="potential.kinetic_factor"):
            parse_material(doc, str(path))


@pytest.mark.parametrize("solver", ["dense", "iterative"])
def test_exact_bands_scale(silicon, solver):
    with_beta, reference = silicon
    k = np.array([[0.0, 0.0, 0.0], [0.3, 0.1, 0.0], [0.5, 0.5, 0.5], [1.0, 0.0, 0.0]]) * (
        2 * np.pi / with_beta.a_A)
    a = exact_energies(build_k_centred_model(with_beta, 80.0), k, 8, solver=solver)
    b = exact_energies(build_k_centred_model(reference, 80.0), k, 8, solver=solver)
    tol = 1e-9 if solver == "dense" else 1e-6
    np.testing.assert_allclose(a, BETA * b, atol=tol)


def test_perturbative_bands_scale(silicon):
    with_beta, reference = silicon
    settings = PerturbationSettings()
    a = compute_band_structure(with_beta, n_k=15, cutoff_eV=60.0, perturbation=settings,
                               check_cutoff=False, fermi_level=False)
    b = compute_band_structure(reference, n_k=15, cutoff_eV=60.0, perturbation=settings,
                               check_cutoff=False, fermi_level=False)
    np.testing.assert_allclose(a.energies_eV, BETA * b.energies_eV, atol=1e-9)
    np.testing.assert_allclose(a.perturbative.energies_eV, BETA * b.perturbative.energies_eV,
                               atol=1e-9)


def test_sum_over_states_masses_scale_and_match_finite_differences(silicon):
    with_beta, reference = silicon
    k0 = np.array([0.85, 0.0, 0.0]) * 2 * np.pi / with_beta.a_A  # near silicon's minimum
    band = 4
    tensors = []
    for m in (with_beta, reference):
        model = build_model(m, 60.0)
        tensors.append(inverse_mass_tensor(eigenstates(model, k0), band))
    np.testing.assert_allclose(tensors[0], BETA * tensors[1], rtol=1e-8, atol=1e-10)
    model = build_model(with_beta, 60.0)
    fd = finite_difference_inverse_mass(model, k0, band)
    np.testing.assert_allclose(tensors[0], fd, rtol=2e-4, atol=2e-4)


def test_degenerate_edge_block_scales(silicon):
    with_beta, reference = silicon
    q = np.array([0.01, 0.02, 0.005])
    blocks = []
    for m in (with_beta, reference):
        states = eigenstates(build_model(m, 60.0), np.zeros(3))
        # the triplet's eigenvectors are any basis of it: compare the block's eigenvalues
        blocks.append(np.linalg.eigvalsh(effective_hamiltonian_in_q(states, np.array([1, 2, 3]),
                                                                    q)))
    np.testing.assert_allclose(blocks[0], BETA * blocks[1], atol=1e-10)


def test_van_hove_and_critical_points_scale(silicon):
    with_beta, reference = silicon
    points = {"Γ": np.zeros(3), "L": np.array([0.5, 0.5, 0.5])}
    out = [label_and_classify(m, 60.0, points, 8)[1] for m in (with_beta, reference)]
    for pa, pb in zip(*out, strict=True):
        for la, lb in zip(pa.levels, pb.levels, strict=True):
            assert [b.kind for b in la.bands] == [b.kind for b in lb.bands]
            if la.hessian_eV_A2 is not None:
                np.testing.assert_allclose(la.hessian_eV_A2, BETA * lb.hessian_eV_A2, rtol=1e-8,
                                           atol=1e-9)
    k = np.array([0.5, 0.5, 0.5]) * 2 * np.pi / with_beta.a_A
    cps = [classify(m, build_model(m, 60.0), k, 4) for m in (with_beta, reference)]
    assert cps[0].kind == cps[1].kind
    np.testing.assert_allclose(cps[0].curvatures, BETA * cps[1].curvatures, rtol=1e-8)


def test_strain_response_carries_beta():
    """The strain runs rewrite V as a continuous v(q): β must survive, and only the kinetic
    part −2βC (k+G)·ε·(k+G) of ∂H/∂ε may change with it."""
    path = find_material("silicon", "planewave")
    doc = read_toml_document(path)
    doc["potential"]["kinetic_factor"] = BETA
    smooth = continuous_document(doc, str(path))
    with_beta = parse_material(smooth, str(path))
    assert with_beta.potential.form == "continuous"
    assert with_beta.potential.kinetic_factor == BETA
    smooth["potential"]["kinetic_factor"] = 1.0
    free = parse_material(smooth, str(path))
    k = np.array([0.2, 0.1, 0.0])
    eps = np.array([[0.01, 0.002, 0.0], [0.002, -0.004, 0.0], [0.0, 0.0, 0.003]])
    model = build_model(with_beta, 60.0)
    h = [strain_hamiltonian(m, build_model(m, 60.0), k, eps) for m in (with_beta, free)]
    kg = k + model.basis.g_cart_invA
    kinetic = -2.0 * HBAR2_OVER_2M0_EV_A2 * np.einsum("gi,ij,gj->g", kg, eps, kg)
    np.testing.assert_allclose(h[0] - h[1], (BETA - 1.0) * np.diag(kinetic), atol=1e-12)


def test_full_zone_kp_scales(silicon):
    with_beta, reference = silicon
    k = np.array([[0.1, 0.0, 0.0], [0.25, 0.25, 0.25]]) * 2 * np.pi / with_beta.a_A
    e = [kp_basis_energies(build_model(m, 60.0), np.zeros(3), 40, k, 8)
         for m in (with_beta, reference)]
    np.testing.assert_allclose(e[0], BETA * e[1], atol=1e-9)


@pytest.mark.parametrize("name", ["gallium-arsenide-fitted", "silicon-fitted"])
def test_spinor_models_scale(name):
    """Spin–orbit (GaAs) and nonlocal wells (Si): bands and Γ8 Luttinger parameters."""
    with_beta, reference = _pair(name)
    k = np.array([[0.0, 0.0, 0.0], [0.2, 0.2, 0.0], [0.5, 0.5, 0.5]]) * (
        2 * np.pi / with_beta.a_A)
    models = [centred_model(m, 60.0, np.zeros(3), spin_orbit=True)
              for m in (with_beta, reference)]
    e = [np.stack([np.linalg.eigvalsh(mod.hamiltonian(kk))[:12] for kk in k])
         for mod in models]
    np.testing.assert_allclose(e[0], BETA * e[1], atol=1e-9)
    g = [gamma8_luttinger_sum_over_states(m, 60.0).gammas for m in (with_beta, reference)]
    np.testing.assert_allclose(g[0], BETA * np.array(g[1]), rtol=1e-6)


def test_spinless_sum_over_states_refuses_nonlocal_wells():
    # the velocity β(k + G) of the sum over states is that of a local potential: nonlocal wells
    # add ∂V_NL/∂k (Chelikowsky & Cohen, Phys. Rev. B 14, 556 (1976), the l-dependent terms),
    # so the spinless sum over states must refuse them rather than print wrong masses
    path = find_material("silicon-fitted", "planewave")
    doc = read_toml_document(path)
    del doc["spin_orbit"]
    # spin_orbit=True: the caller handles the k-dependent terms (a spinless model here)
    model = build_model(parse_material(doc, str(path)), 60.0, spin_orbit=True)
    assert model.n_components == 1 and model.nonlocal_term is not None
    with pytest.raises(InputError, match="nonlocal"):
        eigenstates(model, np.zeros(3))


def test_gap_openings_scale(silicon):
    # zone-boundary degeneracies of H0 = βT: the same plane waves at the same k (β scales every
    # free-electron level), and every predicted and exact level of a group scales by β
    with_beta, reference = silicon
    reports = [gap_analysis(m, cutoff_eV=60.0, points=["X", "L"], crossings=False)
               for m in (with_beta, reference)]
    for pa, pb in zip(reports[0].points, reports[1].points, strict=True):
        assert len(pa.groups) == len(pb.groups) > 0
        for ga, gb in zip(pa.groups, pb.groups, strict=True):
            np.testing.assert_array_equal(ga.miller, gb.miller)
            assert ga.free_electron_eV == pytest.approx(BETA * gb.free_electron_eV, rel=1e-12)
            for field in ("first_order_eV", "second_order_eV", "exact_eV"):
                np.testing.assert_allclose(getattr(ga, field), BETA * getattr(gb, field),
                                           atol=1e-9)
