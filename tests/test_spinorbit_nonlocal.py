"""Nonlocal square-well l = 0, 2 terms of the plane-wave model (built per k like spin–orbit)."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled
from scipy.integrate import quad
from scipy.special import spherical_jn

from bandpert.errors import InputError
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.perturbative_bands import PerturbationSettings
from bandpert.planewave.model import build_k_centred_model, build_model
from bandpert.planewave.nonlocal_term import radial_overlap
from bandpert.planewave.solver import exact_energies

CUTOFF_EV = 60.0


def with_tables(name: str, tables: dict):
    doc = read_toml_document(bundled(name).file)
    doc.update(tables)
    return parse_material(doc, "<test>")


def unit(material) -> float:
    return 2.0 * np.pi / material.a_A


@pytest.mark.parametrize("l", [0, 2])
def test_radial_overlap_is_the_integral(l):  # noqa: E741
    # source: exact integral F_l = ∫_0^R j_l(Kr) j_l(K'r) r² dr by quadrature (scipy)
    radius = 1.3
    for a, b in [(0.0, 0.0), (0.0, 2.0), (1.0, 1.0), (1.0, 2.5), (3.0, 3.0 + 1e-11), (4.0, 0.7)]:
        exact = quad(lambda r, a=a, b=b: spherical_jn(l, a * r) * spherical_jn(l, b * r) * r * r,
                     0, radius)[0]
        assert radial_overlap(l, np.array(a), np.array(b), radius) == pytest.approx(exact,
                                                                                    abs=1e-12)


@pytest.mark.parametrize("l", [0, 2])
def test_radial_overlap_keeps_its_digits_as_k_prime_approaches_k(l):  # noqa: E741
    # source: the same integral by adaptive quadrature (scipy.integrate.quad, QUADPACK) at
    # tight tolerances; the Lommel quotient alone was off by up to 1e-7 for |K − K′| between
    # 1e-10 and 1e-7 Å⁻¹ (the k differences of the masses and of the fit sit there)
    radius = 2.0
    worst = 0.0
    for k in (0.0, 1e-4, 1e-3, 0.7, 3.0, 6.0):
        for d in (0.0, 1e-11, 3e-10, 1e-9, 3e-9, 1e-8, 1e-7, 1e-6, 1e-5, 1e-4, 4e-4, 6e-4, 3e-3,
                  1e-2, 0.1):
            a, b = k, k + d
            exact = quad(lambda r, a=a, b=b: spherical_jn(l, a * r) * spherical_jn(l, b * r)
                         * r * r, 0, radius, epsabs=1e-14, epsrel=1e-13, limit=200)[0]
            worst = max(worst, abs(float(radial_overlap(l, np.array(a), np.array(b), radius))
                                   - exact))
    assert worst < 3e-11, worst


def test_the_well_matrix_equals_the_overlap_pair_by_pair():
    # common practice, no source: the matrix builder evaluates each Bessel function once per
    # basis and takes equal-length pairs from the diagonal form; it must equal radial_overlap
    # (checked against quadrature above) pair by pair, at Γ (many equal lengths), near Γ and
    # at a general point
    from bandpert.planewave.nonlocal_term import nonlocal_term

    material = bundled("germanium-fitted")
    fixed = build_model(material, CUTOFF_EV, spin_orbit=True)
    wells = nonlocal_term(material)
    for k in ([0, 0, 0], [1e-4, 0, 0], [0.3, 0.1, 0.05]):
        kg = np.asarray(k, float) + fixed.basis.g_cart_invA
        norm = np.linalg.norm(kg, axis=1)
        unit_k = kg / np.where(norm > 0, norm, 1.0)[:, None]
        cos = np.clip(unit_k @ unit_k.T, -1, 1)
        radial = sum((2 * ell + 1) * depth * (1.0 if ell == 0 else 1.5 * cos**2 - 0.5)
                     * radial_overlap(ell, norm[:, None], norm[None, :], radius)
                     for ell, depth, radius in wells.channels[0])
        expected = 4 * np.pi / wells.atom_volume_A3 * fixed.structure[0] * radial
        assert np.max(np.abs(wells.matrix(kg, fixed.structure) - expected)) < 1e-11


def test_zero_depths_give_the_local_model():
    # source: exact identity (A_l = 0 adds nothing)
    local = bundled("gallium-arsenide")
    wells = with_tables("gallium-arsenide", {"nonlocal": {"species": {
        "Ga": {"A0_eV": 0.0, "R0_A": 1.2, "A2_eV": 0.0, "R2_A": 1.5}}}})
    k = np.random.default_rng(3).uniform(-1, 1, (5, 3)) * unit(local)
    e0 = exact_energies(build_k_centred_model(local, CUTOFF_EV), k, 8)
    e1 = exact_energies(build_k_centred_model(wells, CUTOFF_EV), k, 8)
    assert np.max(np.abs(e1 - e0)) < 1e-10


def test_wells_keep_symmetry_and_an_s_well_leaves_gamma25_alone():
    # source: group theory: the nonlocal term is invariant under the point group, so Γ25',
    # X and L degeneracies stay (Bouckaert, Smoluchowski & Wigner, Phys. Rev. 50, 58 (1936));
    # the Γ25' states have no s component about an atom (T2 of the site group Td; common
    # practice, no source), so an l = 0 well leaves their energy exactly unchanged while the
    # s-like Γ1 bottom moves up for a repulsive well
    local = bundled("silicon")
    wells = with_tables("silicon", {"nonlocal": {"species": {"Si": {"A0_eV": 3.0, "R0_A": 1.1}}}})
    k = np.array([[0, 0, 0], [1, 0, 0], [0.5, 0.5, 0.5]]) * unit(local)
    e0 = exact_energies(build_k_centred_model(local, CUTOFF_EV), k, 8)
    e1 = exact_energies(build_k_centred_model(wells, CUTOFF_EV), k, 8)
    assert np.ptp(e1[0, 1:4]) < 1e-9                      # Γ25' threefold
    assert abs(e1[0, 1] - e0[0, 1]) < 1e-9                # and unshifted
    assert e1[0, 0] - e0[0, 0] > 0.05                     # Γ1 pushed up
    assert abs(e1[1, 0] - e1[1, 1]) < 1e-9                # X1 twofold
    assert abs(e1[2, 2] - e1[2, 3]) < 1e-9                # L3' twofold
    d2 = with_tables("silicon", {"nonlocal": {"species": {"Si": {"A2_eV": -2.0,
                                                                "R2_A": 1.4}}}})
    e2 = exact_energies(build_k_centred_model(d2, CUTOFF_EV), k[:1], 8)[0]
    assert np.ptp(e2[1:4]) < 1e-9 and np.max(np.abs(e2 - e0[0])) > 1e-3


def test_the_fitted_wells_keep_the_bands_converged_in_the_cutoff():
    # common practice, no source: a model's bands converge as the plane waves grow; germanium-
    # fitted's levels (l = 0 depth following the energy, 250 eV) move by at most 3.2 meV (Γ7,
    # the split-off level) from its cutoff to 1.45 times it (the same parameters at 182 eV:
    # 11.5 meV; the constant-well file at 182 eV: 3.8 meV; depths through free-electron
    # energies moved the Γ conduction level by 43 to 250 meV: DEVELOPERS.md)
    material = bundled("germanium-fitted")
    k = np.array([[0, 0, 0], [0.5, 0.5, 0.5], [1, 0, 0]]) * unit(material)
    e = [exact_energies(build_model(material, c * material.cutoff_eV, spin_orbit=True), k, 10)
         for c in (1.0, 1.45)]
    shift = [x - x[0, 7] for x in e]  # from the valence top
    assert np.max(np.abs(shift[1] - shift[0])) < 0.005


def test_wells_with_spin_orbit_keep_kramers_pairs():
    # source: time reversal and inversion: every band twofold (common practice, no source)
    m = with_tables("silicon", {
        "nonlocal": {"species": {"Si": {"A2_eV": -2.0, "R2_A": 1.4}}},
        "spin_orbit": {"species": {"Si": {"strength_eV": 0.01, "core_shell": 2,
                                          "slater_exponent_invA": 9.307}}}})
    k = np.array([[0.13, 0.31, -0.22]]) * unit(m)
    e = exact_energies(build_k_centred_model(m, CUTOFF_EV), k, 16)[0]
    assert np.max(np.abs(e[0::2] - e[1::2])) < 1e-9
    fixed = build_model(m, CUTOFF_EV, spin_orbit=True)
    h = fixed.hamiltonian(k[0])
    assert np.max(np.abs(h - h.conj().T)) < 1e-12


def test_local_only_computations_refuse_wells():
    m = with_tables("silicon", {"nonlocal": {"species": {"Si": {"A0_eV": 1.0, "R0_A": 1.0}}}})
    with pytest.raises(InputError, match="nonlocal terms") as info:
        build_model(m, CUTOFF_EV)
    assert info.value.key == "nonlocal"
    # the perturbative bands take the wells (V(k) built per k; tests/test_perturbative_spinor.py)
    pb = compute_band_structure(m, n_k=4, cutoff_eV=CUTOFF_EV, check_cutoff=False,
                                perturbation=PerturbationSettings(radius_points=0))
    assert pb.comparison.bound_coverage == 1.0
    assert pb.comparison.over_tolerance_trustworthy == 0
    bs = compute_band_structure(m, n_k=6, cutoff_eV=CUTOFF_EV, check_cutoff=False)
    assert bs.n_bands == 8 and bs.edges is not None


@pytest.mark.parametrize("table, key, words", [
    ({"Ge": {"A0_eV": 1.0, "R0_A": 1.0}}, "nonlocal.species.Ge", "unknown species"),
    ({"Si": {"A0_eV": 1.0}}, "nonlocal.species.Si.R0_A", "missing while A0_eV"),
    ({"Si": {"R2_A": 1.0}}, "nonlocal.species.Si.A2_eV", "missing while R2_A"),
    ({"Si": {"A0_eV": 1.0, "R0_A": -1.0}}, "nonlocal.species.Si.R0_A", "outside"),
    ({"Si": {"A0_eV": 1.0, "R0_A": 0.0}}, "nonlocal.species.Si.R0_A", "positive"),
    ({"Si": {"A1_eV": 1.0, "R1_A": 1.0}}, "nonlocal.species.Si", "unknown key"),
    ({"Si": {"A0_eV": "1", "R0_A": 1.0}}, "nonlocal.species.Si.A0_eV", "expected a number"),
    ({"Si": {"A2_eV": 1.0, "R2_A": 1.0, "A0_energy_slope": -0.2}},
     "nonlocal.species.Si.A0_energy_slope", "without the l = 0 well"),
    ({"Si": {"A0_eV": 1.0, "R0_A": 1.0, "A0_energy_slope": 0.7}},
     "nonlocal.species.Si.A0_energy_slope", "outside"),
    ({"Si": {"A0_eV": 1.0, "R0_A": 1.0, "A0_slope": 0.1}}, "nonlocal.species.Si",
     "unknown key"),
])
def test_bad_nonlocal_tables_are_refused_in_one_line(table, key, words):
    doc = read_toml_document(bundled("silicon").file)
    doc["nonlocal"] = {"species": table}
    with pytest.raises(InputError) as info:
        parse_material(doc, "f.toml")
    assert info.value.key.startswith(key) and words in str(info.value)
    assert "\n" not in str(info.value)
