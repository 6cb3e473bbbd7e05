"""An l = 0 well whose depth follows the state's energy, A_0(E) = A_0 + s E
(bandpert.planewave.nonlocal_term: the generalised eigenproblem H_c ψ = E (1 − M) ψ, solved as
the Hermitian S^{-1/2} H_c S^{-1/2})."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import scipy.linalg
from conftest import bundled

from bandpert.errors import InputError
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.planewave.k_polynomial import ProjectedNonlocal
from bandpert.planewave.model import build_k_centred_model, build_model, centred_model
from bandpert.planewave.solver import exact_energies

CUTOFF_EV = 60.0


def germanium(slope: float, **changes):
    """germanium-fitted with an energy slope on its l = 0 well (and other well keys changed)."""
    doc = read_toml_document(bundled("germanium-fitted").file)
    ge = doc["nonlocal"]["species"]["Ge"]
    ge["A0_energy_slope"] = slope
    ge.update(changes)
    return parse_material(doc, "<test>")


def unit(material) -> float:
    return 2.0 * np.pi / material.a_A


POINTS = np.array([[0, 0, 0], [0.5, 0.5, 0.5], [1, 0, 0], [0.21, -0.13, 0.37]])


def constant_part(model):
    """The same model with every depth at its constant part (H_c)."""
    return replace(model, nonlocal_term=replace(model.nonlocal_term, energy_slopes=()))


def l0_matrix(model, k, depth):
    """The l = 0 well of the given depth alone, on the model's plane waves at k."""
    wells = model.nonlocal_term
    radius = next(r for ell, _, r in wells.channels[0] if ell == 0)
    one = replace(wells, energy_slopes=(), channels=(((0, depth, radius),),))
    return one.matrix(k + model.basis.g_cart_invA, model.structure)


def without_slope():
    """germanium-fitted's wells with the A0_energy_slope key deleted: constant depths."""
    doc = read_toml_document(bundled("germanium-fitted").file)
    del doc["nonlocal"]["species"]["Ge"]["A0_energy_slope"]
    return parse_material(doc, "<test>")


def test_a_zero_slope_is_the_constant_well_bit_for_bit():
    # source: exact identity (s = 0 adds nothing; the key is ignored)
    k = POINTS * unit(bundled("germanium-fitted"))
    e0 = exact_energies(build_k_centred_model(without_slope(), CUTOFF_EV), k, 12)
    e1 = exact_energies(build_k_centred_model(germanium(0.0), CUTOFF_EV), k, 12)
    assert np.array_equal(e0, e1)
    assert not np.array_equal(
        e0, exact_energies(build_k_centred_model(bundled("germanium-fitted"), CUTOFF_EV), k, 12))


@pytest.mark.parametrize("slope", [-0.3, -0.05, 0.2])
def test_the_energies_are_those_of_the_generalised_eigenproblem(slope):
    # source: reference library: LAPACK's generalised Hermitian-definite solver (?hegvd via
    # scipy.linalg.eigh(a, b)) on H_c ψ = E (1 − s P_0) ψ, the linear form of H(E)ψ = Eψ
    m = germanium(slope)
    model = build_model(m, CUTOFF_EV, spin_orbit=True)
    for k in POINTS * unit(m):
        e = np.linalg.eigvalsh(model.hamiltonian(k))
        a = constant_part(model).hamiltonian(k)
        metric = np.eye(len(a)) - np.kron(np.eye(2), l0_matrix(model, k, slope))
        reference = scipy.linalg.eigh(a, metric, eigvals_only=True)
        assert np.max(np.abs(e - reference)) < 1e-10


def test_each_energy_is_an_eigenvalue_at_its_own_depth():
    # source: the definition (self-consistency): E_n is an eigenvalue of the constant-depth
    # model whose l = 0 depth is A_0 + s E_n (exact; no iteration is involved in solving)
    slope = -0.12
    m = germanium(slope)
    model = build_model(m, CUTOFF_EV, spin_orbit=True)
    k = POINTS[3] * unit(m)
    energies = np.linalg.eigvalsh(model.hamiltonian(k))[:16]
    base = constant_part(model)
    for e in energies[::3]:
        h = base.hamiltonian(k) + np.kron(np.eye(2), l0_matrix(model, k, slope * e))
        assert np.min(np.abs(np.linalg.eigvalsh(h) - e)) < 1e-9


def test_the_slope_keeps_symmetry_kramers_pairs_and_gamma25():
    # source: group theory (Bouckaert, Smoluchowski & Wigner, Phys. Rev. 50, 58 (1936)): the
    # metric commutes with the point group, so Γ8 stays fourfold, X and L levels keep their
    # degeneracies, and time reversal with inversion keeps every band twofold; the Γ25′-derived
    # Γ8/Γ7 states have no s component about an atom, so the l = 0 slope leaves them in place
    # (common practice, no source)
    m0, m = without_slope(), germanium(-0.2)
    k = POINTS * unit(m)
    e0 = exact_energies(build_k_centred_model(m0, CUTOFF_EV), k, 16)
    e = exact_energies(build_k_centred_model(m, CUTOFF_EV), k, 16)
    assert np.max(np.abs(e[:, 0::2] - e[:, 1::2])) < 1e-9
    for level, times in ((e0[0, 7], 4), (e0[0, 3], 2)):      # Γ8 and Γ7 of the constant well
        assert np.sum(np.abs(e[0] - level) < 1e-9) == times
    assert e[0, 0] - e0[0, 0] > 0.1       # Γ1, far below zero energy, feels a shallower well
    # Γ2′ (s-like, the one level above Γ8 that moves), far above zero energy: a deeper well
    moved0 = [x for x in e0[0, 8:] if np.min(np.abs(e[0] - x)) > 1e-6]
    moved = [x for x in e[0, 4:] if np.min(np.abs(e0[0] - x)) > 1e-6]
    assert moved and moved0 and moved[0] < moved0[0] - 0.1
    assert np.ptp(e[2, 0:4]) < 1e-9       # X1 fourfold with spin


def test_the_bottom_of_the_band_stays_analytic_at_gamma():
    # source: k·p theory: a nondegenerate band is analytic at Γ with zero slope, so
    # E(2q) − E(0) = 4[E(q) − E(0)] + O(q⁴) (common practice, no source); the free-electron-
    # energy form √(E⁰E⁰′) tried before gave a cone here (ratio 1.96; DEVELOPERS.md)
    m = germanium(-0.2)
    model = centred_model(m, CUTOFF_EV, np.zeros(3), spin_orbit=True)
    q = 0.004 * unit(m) * np.array([1.0, 0.6, 0.3])
    e = [np.linalg.eigvalsh(model.hamiltonian(s * q))[0] for s in (0, 1, 2)]
    assert (e[2] - e[0]) / (e[1] - e[0]) == pytest.approx(4.0, rel=1e-3)


def test_the_reduced_basis_term_is_the_models_wells():
    # source: exact identity: H(k) = (H0 + V + H_so)(k) + wells(k) on the fixed plane waves,
    # which the projected term reproduces on the full basis to rounding
    m = germanium(-0.15)
    model = build_model(m, CUTOFF_EV, spin_orbit=True)
    k = POINTS[1:3] * unit(m)
    wells = ProjectedNonlocal(model).matrices(k)
    for ki, w in zip(k, wells, strict=True):
        rest = replace(model, nonlocal_term=None).hamiltonian(ki)
        assert np.max(np.abs(rest + w - model.hamiltonian(ki))) < 1e-10
    h = model.hamiltonian(k[0])
    v = model.perturbation_eV(k[0])
    assert np.max(np.abs(np.diag(h - v).real - model.unperturbed_eV(k[0])[0])) < 1e-10


def test_a_positive_slope_with_overlapping_wells_is_refused_in_one_line():
    # the metric 1 − s P_0 must stay positive definite (module docstring)
    m = germanium(0.5, R0_A=4.0)
    with pytest.raises(InputError) as info:
        exact_energies(build_k_centred_model(m, CUTOFF_EV), np.zeros((1, 3)), 4)
    assert info.value.key == "nonlocal.species.Ge.A0_energy_slope"
    assert "singular" in str(info.value) and "\n" not in str(info.value)


@pytest.mark.parametrize("radius, cutoff", [(1.2, CUTOFF_EV), (1.2, 300.0), (4.0, 550.0)])
def test_the_factored_metric_is_the_closed_form_well(radius, cutoff):
    # source: exact solution: F_0 in closed (Lommel) form (G. N. Watson, A Treatise on the
    # Theory of Bessel Functions (1944) §5.11; from memory), against which the metric's
    # Gauss–Legendre factors must agree to rounding, up to K_max R ≈ 48 at the largest case
    slope = -0.3
    m = germanium(slope, R0_A=radius)
    model = build_model(m, cutoff, spin_orbit=True)
    k = POINTS[3] * unit(m)
    root = model.nonlocal_term.metric_root(k + model.basis.g_cart_invA)
    u, d = root.vectors, root.shifts
    mu = 1.0 - 1.0 / (1.0 + d) ** 2          # d = (1 − μ)^{-1/2} − 1
    factored = (u * mu) @ u.conj().T
    closed = l0_matrix(model, k, slope)
    assert np.max(np.abs(factored - closed)) < 1e-12 * max(1.0, np.max(np.abs(closed)))


def test_check_names_the_energy_slope():
    from bandpert.physics.material_check import nonlocal_summary
    summary = nonlocal_summary(germanium(-0.2))
    assert "-0.2·E, R0 = 1.2 Å" in summary
