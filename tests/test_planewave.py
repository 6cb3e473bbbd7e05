"""Plane-wave model against exact solutions: Mathieu functions, the empty lattice, conventions."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import scipy.special
from conftest import bundled, make_material
from hypothesis import given, settings
from hypothesis import strategies as st

from bandpert.crystal.lattice import reciprocal_vectors, standard_path
from bandpert.physics.bands import default_bands
from bandpert.planewave.cutoff import converged_cutoff
from bandpert.planewave.model import build_k_centred_model, build_model, centred_model
from bandpert.planewave.potential import fourier_coefficients
from bandpert.planewave.solver import exact_energies
from bandpert.units import HBAR2_OVER_2M0_EV_A2, RYDBERG_EV


def cosine_chain(a_A: float, v1_eV: float):
    return make_material({"type": "chain", "a_A": a_A}, [{"species": "X", "position": [0.0]}],
                         {"form": "fourier", "unit": "eV",
                          "coefficients": [{"miller": [1], "value": v1_eV}]})


@pytest.mark.parametrize("q", [0.05, 0.4, 1.0, 2.5, 6.0, -0.7])
def test_cosine_chain_band_edges_are_mathieu_characteristic_values(q):
    # Source: Abramowitz & Stegun, Handbook of Mathematical Functions (1964), ch. 20
    # (eq. 20.1.1 y'' + (a - 2q cos 2z) y = 0), through scipy.special.mathieu_a / mathieu_b.
    # V(x) = 2 V1 cos(2πx/a) with z = πx/a gives E = E_R a_r(q), E_R = ħ²π²/(2 m a²), q = V1/E_R.
    # Period-a solutions (k = 0) have even order: a0, b2, a2, b4, a4, ...; period-2a solutions
    # (zone boundary) odd order: b1, a1, b3, a3, ...
    a = 3.0
    e_r = HBAR2_OVER_2M0_EV_A2 * (np.pi / a) ** 2
    material = cosine_chain(a, q * e_r)
    model = build_model(material, cutoff_eV=e_r * 60.0**2)  # 121 plane waves
    n = 7
    e = exact_energies(model, np.array([[0.0], [np.pi / a]]), n) / e_r  # absolute, no shift
    even = [scipy.special.mathieu_a(0, q)]
    odd = []
    for r in range(1, 8):
        odd += [scipy.special.mathieu_a(r, q), scipy.special.mathieu_b(r, q)] if r % 2 else []
        even += [scipy.special.mathieu_a(r, q), scipy.special.mathieu_b(r, q)] if r % 2 == 0 \
            else []
    expected_k0 = np.sort(even)[:n]
    expected_zb = np.sort(odd)[:n]
    tol = 1e-8 + 1e-7 * np.abs(expected_k0)
    assert np.all(np.abs(e[0] - expected_k0) <= tol)
    tol = 1e-8 + 1e-7 * np.abs(expected_zb)
    assert np.all(np.abs(e[1] - expected_zb) <= tol)


# Free-electron degeneracies in units (2π/a)², Ashcroft & Mermin, Solid State Physics (1976),
# ch. 9, Fig. 9.5 and Table 9.1 for fcc (from memory); bcc counts are the same textbook counting
# (common practice, no source). Both were also verified by direct enumeration of the lattices.
FCC_LEVELS = {
    "Γ": [(0.0, 1), (3.0, 8), (4.0, 6), (8.0, 12)],
    "X": [(1.0, 2), (2.0, 4), (5.0, 8), (6.0, 8)],
    "L": [(0.75, 2), (2.75, 6), (4.75, 6), (6.75, 8)],
}
BCC_LEVELS = {
    "Γ": [(0.0, 1), (2.0, 12), (4.0, 6), (6.0, 24)],
    "H": [(1.0, 6), (3.0, 8), (5.0, 24)],
    "N": [(0.5, 2), (1.5, 4), (2.5, 4), (3.5, 8)],
    "P": [(0.75, 4), (2.75, 12), (4.75, 12)],
}


@pytest.mark.parametrize("lattice,levels", [("fcc", FCC_LEVELS), ("bcc", BCC_LEVELS)])
def test_empty_lattice_levels_and_degeneracies(lattice, levels):
    from bandpert.crystal.lattice import standard_path

    a = 4.0
    material = make_material({"type": lattice, "a_A": a}, [{"species": "X",
                             "position": [0.0, 0.0, 0.0]}], {"form": "empty"})
    unit = HBAR2_OVER_2M0_EV_A2 * (2 * np.pi / a) ** 2
    model = build_model(material, cutoff_eV=unit * 16.0)
    points, _ = standard_path(material)
    for label, expected in levels.items():
        n = sum(c for _, c in expected)
        k = np.array(points[label]) @ model.reciprocal_invA
        e = exact_energies(model, k[None], n)[0] / unit
        got = [(float(v), int(c)) for v, c in zip(*np.unique(np.round(e, 8),
                                                              return_counts=True), strict=True)]
        assert got == [(float(v), c) for v, c in expected], label


@settings(max_examples=25, deadline=None)
@given(st.lists(st.floats(-0.5, 0.5), min_size=3, max_size=3))
def test_empty_lattice_equals_free_electron_energies(k_frac):
    # Exact solution: with V = 0, E = ħ²|k+G|²/2m0 for every G (common practice, no source).
    material = make_material({"type": "hexagonal", "a_A": 2.5, "c_A": 4.0},
                             [{"species": "X", "position": [0.0, 0.0, 0.0]}], {"form": "empty"})
    model = build_model(material, cutoff_eV=120.0)
    k = np.array(k_frac) @ model.reciprocal_invA
    e = exact_energies(model, k[None], 6)[0]
    # an independent enumeration of the lattice, beyond the basis
    r = range(-6, 7)
    g = np.array(list(itertools.product(r, r, r))) @ model.reciprocal_invA
    free = np.sort(HBAR2_OVER_2M0_EV_A2 * np.sum((k + g) ** 2, axis=1))[:6]
    assert np.allclose(e, free, atol=1e-9)


def test_symmetric_form_factor_on_111_shell_by_hand(silicon):
    # Source: Cohen & Bergstresser, Phys. Rev. 141, 789 (1966): V(G) = V_S(|G|²) cos(G·τ), τ =
    # a(1,1,1)/8.
    # For G = (2π/a)(1,1,1): G·τ = 3π/4, so V = V_S(3) cos(3π/4) = -0.21 Ry × (-1/√2).
    b = np.linalg.inv(silicon.vectors_A).T * 2 * np.pi
    miller = np.rint(np.linalg.solve(b.T, np.array([1.0, 1.0, 1.0]) * 2 * np.pi / silicon.a_A))
    v = fourier_coefficients(silicon, miller.astype(int))
    assert v == pytest.approx(-0.21 * RYDBERG_EV * np.cos(3 * np.pi / 4), abs=1e-12)


def _per_species_twin(material, values: dict[str, list[float]]):
    pot = material.potential
    return make_material(
        {"type": "fcc", "a_A": material.a_A},
        [{"species": a.species, "position": list(a.position_frac)} for a in material.atoms],
        {"form": "per-species", "unit": "eV", "shells": list(pot.shells_g2),
         "species": values})


@pytest.mark.parametrize("name", ["silicon", "gallium-arsenide"])
def test_per_species_form_factors_combine_with_one_half(name):
    # The factor 1/N_atoms in V(G) = (1/N) Σ_j v_j e^{-iG·τ_j} makes V_S = (v1 + v2)/2 and
    # V_A = (v2 - v1)/2 (source: Cohen & Bergstresser, Phys. Rev. 141, 789 (1966), eq. 2, 3).
    material = bundled(name)
    pot = material.potential
    vs, va = np.array(pot.symmetric_eV), np.array(pot.antisymmetric_eV)
    s1, s2 = material.atoms[0].species, material.atoms[1].species
    values = {s1: list(vs - va)} if s1 == s2 else {s1: list(vs - va), s2: list(vs + va)}
    twin = _per_species_twin(material, values)
    k = np.array([[0.0, 0.0, 0.0], [0.3, 0.1, 0.2], [0.5, 0.0, 0.5]])
    e1 = exact_energies(build_model(material, 150.0), k @ np.linalg.inv(material.vectors_A).T
                        * 2 * np.pi, 8)
    e2 = exact_energies(build_model(twin, 150.0), k @ np.linalg.inv(twin.vectors_A).T
                        * 2 * np.pi, 8)
    assert np.allclose(e1, e2, atol=1e-10)
    # the classic trap: forgetting the ½ doubles the potential and changes the bands
    doubled = _per_species_twin(material, {s: list(2 * np.array(v)) for s, v in values.items()})
    e3 = exact_energies(build_model(doubled, 150.0), k @ np.linalg.inv(material.vectors_A).T
                        * 2 * np.pi, 8)
    assert np.max(np.abs(e3 - e1)) > 0.5


@settings(max_examples=20, deadline=None)
@given(st.lists(st.floats(-0.5, 0.5), min_size=3, max_size=3),
       st.lists(st.floats(-1.0, 1.0), min_size=3, max_size=3))
def test_energies_do_not_depend_on_the_origin(shift, k_frac):
    # Moving every atom by the same vector multiplies V(G) by a phase: a unitary change of basis
    # that leaves the spectrum unchanged (common practice, no source).
    ref = bundled("gallium-arsenide")
    moved = make_material(
        {"type": "fcc", "a_A": ref.a_A},
        [{"species": a.species, "position": list(np.add(a.position_frac, shift))}
         for a in ref.atoms],
        {"form": "symmetric-antisymmetric", "unit": "eV", "shells": list(ref.potential.shells_g2),
         "symmetric": list(ref.potential.symmetric_eV),
         "antisymmetric": list(ref.potential.antisymmetric_eV)})
    m1, m2 = build_model(ref, 60.0), build_model(moved, 60.0)
    k = (np.array(k_frac) @ m1.reciprocal_invA)[None]
    assert np.allclose(exact_energies(m1, k, 6), exact_energies(m2, k, 6), atol=1e-9)


@settings(max_examples=20, deadline=None)
@given(st.lists(st.floats(-1.0, 1.0), min_size=3, max_size=3))
def test_hamiltonian_is_hermitian_and_time_reversal_symmetric(k_frac):
    # A real local potential gives a Hermitian H(k) with E(k) = E(-k) (Kramers/time reversal;
    # Ashcroft & Mermin (1976), ch. 8 and problem 8.6; common practice).
    model = build_model(bundled("gallium-arsenide"), 60.0)
    k = np.array(k_frac) @ model.reciprocal_invA
    h = model.hamiltonian(k)
    assert np.allclose(h, h.conj().T, atol=1e-12)
    assert np.allclose(exact_energies(model, k[None], 8), exact_energies(model, -k[None], 8),
                       atol=1e-9)


def test_centrosymmetric_model_is_real_and_zincblende_complex(silicon):
    # Inversion centre at the origin makes V(G) = V(-G) real (common practice, no source).
    assert build_model(silicon, 60.0).is_real
    assert not build_model(bundled("gallium-arsenide"), 60.0).is_real


def test_potential_matrix_is_built_from_differences(silicon):
    # V_{GG'} = V(G - G'): the potential matrix is Toeplitz in the Miller indices
    # (common practice, no source).
    model = build_model(silicon, 60.0)
    m = model.basis.miller
    i, j = 3, 11
    assert model.potential_eV[i, j] == pytest.approx(
        complex(fourier_coefficients(silicon, m[i] - m[j])).real, abs=1e-12)


def test_a_basis_too_large_for_memory_is_refused_with_its_size(silicon):
    # 2000 eV in silicon would need some 10^4 plane waves: refused before any matrix is built,
    # with the matrix size in the message (project requirement; common practice, no source).
    from bandpert.errors import InputError

    with pytest.raises(InputError, match=r"GiB") as info:
        build_model(silicon, 2000.0)
    assert info.value.key == "basis.cutoff_eV"


# Dimensions of the irreducible representations (spinless) of the little group at the labelled
# points, hence the multiplicities a level may have there:
# - fcc, symmorphic O_h^5 (aluminium): Bouckaert, Smoluchowski & Wigner, Phys. Rev. 50, 58
#   (1936), tables of Γ, X, L, W, K (Γ: 1, 2, 3; X, L, W: 1, 2; K: 1);
# - diamond, non-symmorphic O_h^7 (silicon, germanium): every level at X and W is doubly
#   degenerate (sticking of bands; C. Herring, J. Franklin Inst. 233, 525 (1942), from memory),
#   L: 1, 2; K: 1;
# - zincblende T_d^2 (gallium arsenide): Parmenter, Phys. Rev. 100, 573 (1955), from memory
#   (Γ: 1, 2, 3; X, L, W: 1, 2; K: 1).
IRREP_DIMENSIONS = {
    "aluminium": {"Γ": {1, 2, 3}, "X": {1, 2}, "L": {1, 2}, "W": {1, 2}, "K": {1}},
    "silicon": {"Γ": {1, 2, 3}, "X": {2}, "L": {1, 2}, "W": {2}, "K": {1}},
    "germanium": {"Γ": {1, 2, 3}, "X": {2}, "L": {1, 2}, "W": {2}, "K": {1}},
    "gallium-arsenide": {"Γ": {1, 2, 3}, "X": {1, 2}, "L": {1, 2}, "W": {1, 2}, "K": {1}},
}


def level_clusters(energies: np.ndarray, gap_eV: float = 1e-4) -> list[np.ndarray]:
    """Sorted levels cut where consecutive ones differ by more than ``gap_eV``; the last
    cluster is dropped (it may continue above the levels computed)."""
    cuts = np.flatnonzero(np.diff(energies) > gap_eV) + 1
    return np.split(energies, cuts)[:-1]


@pytest.fixture(scope="module")
def default_models():
    out = {}
    for name in IRREP_DIMENSIONS:
        material = bundled(name)
        cut = converged_cutoff(material, default_bands(material))
        out[name] = (material, cut, build_k_centred_model(material, cut))
    return out


@pytest.mark.parametrize("name", list(IRREP_DIMENSIONS))
def test_symmetry_required_degeneracies_hold_at_the_labelled_points(name, default_models):
    # Each level at Γ, X, L, W, K is a set of exactly degenerate states whose number is the
    # dimension of an irreducible representation of the little group (sources above): with a
    # basis centred on k, every cluster of levels closer than 0.1 meV must be degenerate to
    # 1e-6 eV and of an allowed size, for the 16 lowest levels at the default cutoff.
    material, _, model = default_models[name]
    points, _ = standard_path(material)
    b = reciprocal_vectors(material.vectors_A)
    for label, allowed in IRREP_DIMENSIONS[name].items():
        e = exact_energies(model, np.array(points[label]) @ b[None, :], 16)[0]
        for cluster in level_clusters(e):
            assert np.ptp(cluster) <= 1e-6, (label, cluster)
            assert len(cluster) in allowed, (label, cluster)


def test_equivalent_points_give_equal_levels(default_models):
    # K and U are equivalent in the fcc zone (U = K + a reciprocal-lattice vector after a point
    # operation; Bouckaert, Smoluchowski & Wigner 1936): with a basis centred on each k their
    # levels coincide, which a fixed Γ-centred basis misses (aluminium: 4.22 vs 4.25 meV gaps).
    for name in ("aluminium", "silicon"):
        material, _, model = default_models[name]
        points, _ = standard_path(material)
        k = np.array([points["K"], points["U"]]) @ reciprocal_vectors(material.vectors_A)
        e = exact_energies(model, k, 12)
        assert np.abs(e[0] - e[1]).max() < 1e-9


def test_the_gamma_centred_basis_splits_silicon_at_w(default_models):
    # What the k-centred basis repairs (measured on the 1966 silicon model at its default
    # cutoff): the fixed Γ-centred basis splits the W doublets of bands 5/6 by 1.5 meV and
    # 9/10 by 4.8 meV. The fixed basis stays right for stencils, but not for levels at W.
    material, cut, model = default_models["silicon"]
    points, _ = standard_path(material)
    k = np.array(points["W"]) @ reciprocal_vectors(material.vectors_A)
    fixed = exact_energies(build_model(material, cut), k[None], 10)[0]
    centred = exact_energies(model, k[None], 10)[0]
    assert fixed[5] - fixed[4] > 1e-3 and fixed[9] - fixed[8] > 4e-3
    assert abs(centred[5] - centred[4]) < 1e-6 and abs(centred[9] - centred[8]) < 1e-6


def test_k_centred_energies_equal_a_fixed_basis_centred_on_each_k(silicon):
    # The batched, per-size gather of H(k) against building the basis at each k from scratch
    # (internal consistency; common practice, no source); both solver paths.
    rng = np.random.default_rng(3)
    k = rng.normal(scale=0.6, size=(12, 3))
    for cut in (60.0, 150.0):  # below and above the batched-path size
        model = build_k_centred_model(silicon, cut)
        e = exact_energies(model, k, 8)
        ref = np.array([exact_energies(centred_model(silicon, cut, kk), kk[None], 8)[0]
                        for kk in k])
        assert np.abs(e - ref).max() < 1e-9


def test_k_centred_energies_are_periodic_in_k(silicon):
    # E_n(k + G) = E_n(k) (Bloch's theorem; Ashcroft & Mermin, Solid State Physics (1976),
    # ch. 8): with a basis centred on k it holds to rounding, not only as far as converged.
    model = build_k_centred_model(silicon, 100.0)
    b = reciprocal_vectors(silicon.vectors_A)
    k = np.array([[0.11, -0.23, 0.37]]) @ b
    shifted = k + np.array([1, -2, 1]) @ b
    assert np.abs(exact_energies(model, k, 8) - exact_energies(model, shifted, 8)).max() < 1e-9
