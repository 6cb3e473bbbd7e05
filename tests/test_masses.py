"""Effective masses by second-order k·p (sum over states) against exact bands and handbooks."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import spglib
from conftest import bundled, make_material
from hypothesis import given, settings
from hypothesis import strategies as st

from bandpert.errors import InputError
from bandpert.output.masses_report import masses_notes, masses_results, masses_rows
from bandpert.output.text import fixed, vector
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.extrema import (
    conductivity_mass,
    density_of_states_mass,
    edge_point,
    effective_density_of_states_cm3,
    star_size,
)
from bandpert.physics.mass_analysis import compute_masses
from bandpert.physics.mass_tensor import (
    canonical_axis,
    degenerate_set,
    distinct_principal,
    eigenstates,
    finite_difference_inverse_mass,
    inverse_mass_tensor,
)
from bandpert.physics.masses import band_masses
from bandpert.planewave.model import build_model
from bandpert.planewave.solver import exact_energies
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C


def _rotations(material):
    names = sorted({a.species for a in material.atoms})
    cell = (material.vectors_A, [a.position_frac for a in material.atoms],
            [names.index(a.species) for a in material.atoms])
    return spglib.get_symmetry_dataset(cell).rotations


@pytest.fixture(scope="module")
def silicon_edges():
    material = bundled("silicon")
    bs = compute_band_structure(material, n_k=120)
    rot = _rotations(material)
    k_c = edge_point(bs.model, bs.path.k_cart_invA, bs.edges.conduction_min_index, 4, False)
    k_v = edge_point(bs.model, bs.path.k_cart_invA, bs.edges.valence_max_index, 3, True)
    return (bs, band_masses(material, bs.model, k_c, 4, rot, label="conduction minimum"),
            band_masses(material, bs.model, k_v, 3, rot, label="valence maximum"))


@settings(max_examples=15, deadline=None)
@given(st.lists(st.floats(-0.45, 0.45), min_size=3, max_size=3))
def test_free_electrons_have_the_free_mass(k_frac):
    # V = 0: E = ħ²|k+G|²/2m0, so m* = m0 exactly at any non-degenerate k (common practice,
    # no source).
    material = make_material({"type": "fcc", "a_A": 4.0},
                             [{"species": "X", "position": [0.0, 0.0, 0.0]}], {"form": "empty"})
    model = build_model(material, 60.0)
    k = np.array(k_frac) @ model.reciprocal_invA
    states = eigenstates(model, k)
    if degenerate_set(states, 0).size > 1:
        return
    assert np.allclose(inverse_mass_tensor(states, 0), np.eye(3), atol=1e-10)


def test_sum_over_states_is_the_exact_curvature_of_the_finite_basis_band(silicon_edges):
    # With every basis state kept, second-order k·p is the exact second derivative of the
    # finite-basis band (source: Kittel, Quantum Theory of Solids, 1963, ch. 9): the finite
    # difference
    # agrees to about 1e-5 relative.
    _, cond, _ = silicon_edges
    assert cond.relative_difference < 1e-5
    model = build_model(bundled("silicon"), 150.0)
    k = np.array([0.31, 0.12, 0.2])
    states = eigenstates(model, k)
    for band in (0, 1, 2):
        sos = inverse_mass_tensor(states, band)
        fd = finite_difference_inverse_mass(model, k, band)
        assert np.abs(sos - fd).max() / np.abs(fd).max() < 1e-5


def test_convergence_with_the_number_of_states_kept(silicon_edges):
    _, cond, _ = silicon_edges
    masses = cond.convergence_masses
    assert np.allclose(masses[-1], np.sort(cond.tensor.principal_masses))
    err = np.abs(masses - masses[-1]).max(axis=1)
    assert err[0] > 1e-3  # a short sum is visibly off ...
    assert np.all(np.diff(err[-4:]) <= 1e-12) or err[-2] < 1e-4  # ... and it converges


def test_silicon_conduction_valley_position_and_masses(silicon_edges):
    # Conduction minimum near 0.85 of Γ–X; m_l ≈ 0.92–0.98, m_t ≈ 0.19 (Sze, Physics of
    # Semiconductor Devices, 2nd ed. 1981, App. G; from memory): within 15 %.
    bs, cond, _ = silicon_edges
    x = np.array(bs.path.points_frac["X"])
    frac = np.linalg.norm(cond.k_frac) / np.linalg.norm(x)
    assert np.allclose(np.cross(cond.k_frac, x), 0.0, atol=1e-6)
    assert 0.8 <= frac <= 0.9
    m = np.sort(cond.tensor.principal_masses)
    m_t, m_l = m[0], m[2]
    assert m[0] == pytest.approx(m[1], rel=1e-6)  # transverse degenerate (C4v valley)
    assert 0.92 * 0.85 <= m_l <= 0.98 * 1.15
    assert m_t == pytest.approx(0.19, rel=0.15)
    # the longitudinal axis is the valley's Γ–X direction
    axis = cond.tensor.principal_axes[:, np.argmax(cond.tensor.principal_masses)]
    k_dir = cond.k_cart_invA / np.linalg.norm(cond.k_cart_invA)
    assert abs(abs(axis @ k_dir) - 1.0) < 1e-6


def test_silicon_valley_counting_dos_and_conductivity_masses(silicon_edges):
    # Six Δ valleys: m_dos = 6^{2/3}(m_l m_t²)^{1/3} ≈ 1.08 and m_c = 3/(1/m_l + 2/m_t) ≈ 0.26
    # from the handbook masses (Sze 1981, §1.4 and App. G; from memory): within 15 %.
    _, cond, _ = silicon_edges
    assert cond.critical_point.kind == "minimum"
    assert cond.valleys == 6
    m = np.sort(cond.tensor.principal_masses)
    assert cond.dos_mass == pytest.approx(6 ** (2 / 3) * (m[2] * m[0] ** 2) ** (1 / 3))
    assert cond.conductivity_mass == pytest.approx(3 / (1 / m[2] + 2 / m[0]))
    assert cond.dos_mass == pytest.approx(1.08, rel=0.15)
    assert cond.conductivity_mass == pytest.approx(0.26, rel=0.15)


def test_germanium_has_four_l_valleys():
    # Ge conduction minimum at L, four valleys (Sze 1981, Fig. 1.10; common practice).
    material = bundled("germanium")
    bs = compute_band_structure(material, n_k=80)
    k = edge_point(bs.model, bs.path.k_cart_invA, bs.edges.conduction_min_index, 4, False)
    res = band_masses(material, bs.model, k, 4, _rotations(material))
    assert res.critical_point.kind == "minimum"
    assert np.allclose(res.k_frac, 0.5, atol=1e-6)
    assert res.valleys == 4


def test_star_sizes_in_fcc():
    # Stars of k in the fcc zone: L gives 4 valleys, X gives 3, a general Δ point 6
    # (Ashcroft & Mermin 1976, ch. 8 and Fig. 8.10; common practice).
    rot = _rotations(bundled("silicon"))
    assert star_size(np.array([0.5, 0.5, 0.5]), rot) == 4
    assert star_size(np.array([0.5, 0.0, 0.5]), rot) == 3
    assert star_size(np.array([0.4, 0.0, 0.4]), rot) == 6


def test_valence_triplet_dkk_parameters_match_the_exact_bands(silicon_edges):
    # The spinless Γ25' triplet: along [100] the curvatures are 1 + {L, M, M}, along [111]
    # 1 + {(L+2M+2N)/3, (L+2M−N)/3 twice}, L, M, N the usual DKK parameters and 1 the
    # free-electron term (source: Dresselhaus, Kip & Kittel, Phys. Rev. 98, 368 (1955)).
    # Checked against finite differences of the exact bands along each direction.
    bs, _, val = silicon_edges
    assert list(val.degenerate_bands) == [1, 2, 3]
    big_l, big_m, big_n = val.edge.dkk_LMN
    big_l, big_m = big_l + 1, big_m + 1  # the curvatures include the free-electron term
    model = bs.model
    h = 0.004
    for name, expected in (("[100]", [big_l, big_m, big_m]),
                           ("[111]", [(big_l + 2 * big_m + 2 * big_n) / 3,
                                      (big_l + 2 * big_m - big_n) / 3,
                                      (big_l + 2 * big_m - big_n) / 3])):
        u = {"[100]": np.array([1.0, 0, 0]), "[111]": np.ones(3) / np.sqrt(3)}[name]
        e = exact_energies(model, np.array([0 * u, h * u, 2 * h * u]), 4)[:, 1:4]
        # E(q) = E0 + C c q² + O(q⁴): Richardson on h and 2h removes the q⁴ term
        c_h = (e[1] - e[0]) / (C * h**2)
        c_2h = (e[2] - e[0]) / (C * (2 * h) ** 2)
        fd = np.sort((4 * c_h - c_2h) / 3)
        assert np.allclose(fd, np.sort(expected), rtol=2e-3, atol=2e-3)
    g1, g2, g3 = val.edge.luttinger
    assert g1 == pytest.approx(-(big_l + 2 * big_m) / 3)  # = −1 − (L + 2M)/3, usual L, M
    assert g2 == pytest.approx(-(big_l - big_m) / 6)
    assert g3 == pytest.approx(-big_n / 6)
    # the spinless 1966 model against the silicon Luttinger parameters γ1 = 4.28, γ2 = 0.34,
    # γ3 = 1.45 (Lawaetz, Phys. Rev. B 4, 3460 (1971); from memory): same size and ordering
    assert g1 == pytest.approx(4.28, rel=0.15) and g3 == pytest.approx(1.45, rel=0.15)
    assert 0.0 < g2 < g3 < g1


def test_effective_density_of_states_formula():
    # N = 2 (m kT/2πħ²)^{3/2} = 2.51e19 (m/m0)^{3/2} (T/300)^{3/2} cm^-3; with m_dos = 1.08 at
    # 300 K this is silicon's N_c = 2.8e19 cm^-3 (Sze 1981, App. G; from memory).
    assert effective_density_of_states_cm3(1.0, 300.0) == pytest.approx(2.51e19, rel=0.01)
    assert effective_density_of_states_cm3(1.08, 300.0) == pytest.approx(2.8e19, rel=0.02)


def test_dos_and_conductivity_mass_formulas():
    # Source: Sze 1981, §1.4: single spherical valley gives back its mass.
    assert density_of_states_mass(np.array([0.3, 0.3, 0.3]), 1) == pytest.approx(0.3)
    assert conductivity_mass(np.array([0.3, 0.3, 0.3])) == pytest.approx(0.3)


# ---- critical points: a mass only where the band has one ----------------------------------


def _along(model, k, u, bands, h=0.004):
    """Independent second differences of the sorted exact bands at k along unit u (m0/m*)."""
    e = np.array([np.linalg.eigvalsh(model.hamiltonian(k + s * h * u))[:max(bands) + 1]
                  for s in (-1.0, 0.0, 1.0)])
    return ((e[0] + e[2] - 2 * e[1]) / h**2 / (2 * C))[bands]


def test_silicon_x1_is_a_crossing_without_a_mass():
    # In the diamond structure every level at X is twofold degenerate (non-symmorphic space
    # group; source: Yu & Cardona, Fundamentals of Semiconductors, 2010, §2.3 and Fig. 2.10;
    # from memory), and the X1 pair splits linearly along Δ: no effective mass exists there.
    material = bundled("silicon")
    model = build_model(material, 120.0)
    x = np.array([0.5, 0.0, 0.5]) @ model.reciprocal_invA
    res = band_masses(material, model, x, 4, _rotations(material), label="X1")
    cp = res.critical_point
    assert cp.kind == "crossing" and cp.degeneracy == "symmetry"
    assert list(res.degenerate_bands) == [4, 5]
    assert cp.run_splittings_eV[1] > 1e-6  # the run's Γ-centred basis splits the pair ...
    assert cp.centred_splittings_eV[0, 1] < 1e-7  # ... the basis centred on X does not
    assert res.tensor is None and res.valleys is None and res.dos_mass is None
    assert res.effective_dos_cm3 is None
    # the nearest minimum is the Δ valley near 0.85 of Γ→X (Sze 1981, App. G; from memory)
    assert cp.nearest.kind == "minimum" and 0.8 < cp.nearest.along_fraction < 0.9
    assert "crossing" in res.summary and "no effective mass" in res.summary


def test_silicon_l3_prime_is_a_saddle_with_signed_curvatures():
    # L3′ (bands 3, 4) curves up along Λ = [111] and down across it: a saddle (van Hove, Phys.
    # Rev. 89, 1189 (1953): critical points of index 0–3). Checked against independent second
    # differences of the exact bands.
    material = bundled("silicon")
    model = build_model(material, 120.0)
    big_l = np.array([0.5, 0.5, 0.5]) @ model.reciprocal_invA
    res = band_masses(material, model, big_l, 2, _rotations(material), cross_check=False)
    cp = res.critical_point
    assert cp.kind == "saddle" and cp.saddle_index == 2
    assert list(res.degenerate_bands) == [2, 3]
    assert res.valleys is None and res.dos_mass is None and res.effective_dos_cm3 is None
    u111 = np.ones(3) / np.sqrt(3)
    fd111 = _along(model, big_l, u111, [2, 3])
    fd100 = _along(model, big_l, np.array([1.0, 0, 0]), [2, 3])
    assert np.all(fd111 > 0) and np.all(fd100 < 0)
    assert np.allclose(np.sort(res.edge.direction_curvatures["[111]"]), np.sort(fd111),
                       rtol=1e-2, atol=1e-2)
    assert np.allclose(np.sort(res.edge.direction_curvatures["[100]"]), np.sort(fd100),
                       rtol=1e-2, atol=1e-2)
    assert cp.curvatures[-1] > 0 > cp.curvatures[0]


def test_gaas_x_is_a_saddle_with_the_minimum_off_x():
    # In this model the lowest GaAs conduction band at X is a maximum along Γ–X and a minimum
    # across it (a "camel's back"); the true minimum lies on Γ–X a little before X. Checked
    # against an independent scan of the exact band along Γ–X (numpy eigvalsh).
    material = bundled("gallium-arsenide")
    model = build_model(material, 120.0)
    x = np.array([0.5, 0.0, 0.5]) @ model.reciprocal_invA
    res = band_masses(material, model, x, 4, _rotations(material), cross_check=False)
    cp = res.critical_point
    assert cp.kind == "saddle" and cp.saddle_index == 1
    assert res.valleys is None and res.dos_mass is None and res.conductivity_mass is None
    assert np.sum(cp.curvatures < 0) == 1
    t = np.linspace(0.8, 1.0, 81)
    scan = exact_energies(model, t[:, None] * x[None, :], 5)[:, 4]
    assert t[np.argmin(scan)] < 1.0
    near = cp.nearest
    assert near.kind == "minimum"
    assert near.along_fraction == pytest.approx(t[np.argmin(scan)], abs=0.01)
    assert near.below_eV == pytest.approx(scan[-1] - scan.min(), abs=2e-4)
    assert "saddle" in res.summary and "nearest minimum" in res.summary


def test_a_band_far_from_the_gap_is_flagged():
    # Empirical form factors are fitted to the bands near the gap (Cohen & Bergstresser, Phys.
    # Rev. 141, 789 (1966)); band 99 at Γ lies about 90 eV up.
    material = bundled("silicon")
    model = build_model(material, 120.0)
    res = band_masses(material, model, np.zeros(3), 98, cross_check=False)
    assert "from the gap" in res.critical_point.warning


def test_a_band_the_basis_does_not_hold_is_an_input_error():
    material = bundled("silicon")
    model = build_model(material, 40.0)
    with pytest.raises(InputError, match="does not exist"):
        band_masses(material, model, np.zeros(3), model.size + 3)


# --- what the masses outputs say: distinct principal masses, frames, warnings -------------------


def _rotation(seed: int) -> np.ndarray:
    q, _ = np.linalg.qr(np.random.default_rng(seed).normal(size=(3, 3)))
    return q


def test_distinct_principal_values_keep_only_the_axes_the_tensor_fixes():
    # A symmetric tensor R diag(w) Rᵀ has the columns of R as axes; where two w are equal
    # only their plane is fixed, and where all three are, no direction at all (common
    # practice, no source: eigenvectors of a repeated eigenvalue span a subspace).
    r = _rotation(3)
    iso = distinct_principal(np.array([2.0, 2.0, 2.0]), r)
    assert len(iso) == 1 and iso[0].axis is None and iso[0].multiplicity == 3
    uni = distinct_principal(np.array([5.0, 1.0, 5.0 * (1 + 1e-7)]), r)
    assert [p.multiplicity for p in uni] == [1, 2]
    assert abs(abs(uni[0].axis @ r[:, 1]) - 1.0) < 1e-12
    assert uni[1].axis is None and abs(abs(uni[1].normal @ r[:, 1]) - 1.0) < 1e-12
    aniso = distinct_principal(np.array([1.0, 2.0, 3.0]), r)
    assert [p.multiplicity for p in aniso] == [1, 1, 1]
    for p, col in zip(aniso, r.T, strict=True):
        assert abs(abs(p.axis @ col) - 1.0) < 1e-12
        assert p.axis[np.argmax(np.abs(p.axis))] > 0  # one sign, always the same


def test_axes_print_without_negative_zero():
    axis = canonical_axis(np.array([-1e-17, -1.0, 0.0]))
    assert vector(axis) == "(0.0000, 1.0000, 0.0000)"
    assert fixed(-4e-9) == "0.0000" and fixed(-4e-9, 4, sign=True) == "+0.0000"


def test_silicon_valley_tensor_is_uniaxial_along_its_valley(silicon_edges):
    # Si conduction valleys on Δ: m_l along the valley's <100> axis, m_t twice across it
    # (Sze, Physics of Semiconductor Devices, 2nd ed. 1981, App. G; from memory).
    _, cond, _ = silicon_edges
    t = cond.tensor
    assert t.anisotropy == "uniaxial"
    single, pair = sorted(t.distinct, key=lambda p: p.multiplicity)
    k_dir = cond.k_cart_invA / np.linalg.norm(cond.k_cart_invA)
    assert abs(single.axis @ k_dir) == pytest.approx(1.0, abs=1e-6)
    assert abs(1.0 / single.value) > abs(1.0 / pair.value)  # the longitudinal mass is heavier
    assert pair.normal is not None and pair.axis is None


@pytest.fixture(scope="module")
def gaas_gamma():
    # The conduction band at Γ of GaAs, at a modest cutoff (point request: no band-edge search,
    # no deformation potentials, no implied k·p parameters).
    return compute_masses(bundled("gallium-arsenide"), point="G", band=5, cutoff_eV=60.0)


def test_gaas_gamma_mass_is_one_number_without_axes(gaas_gamma):
    # In a cubic crystal a second-rank tensor is isotropic (Nye, Physical Properties of
    # Crystals, 1957, ch. 1; from memory): one mass at Γ, no principal axes.
    m = gaas_gamma.entries[0]
    assert m.tensor.anisotropy == "isotropic"
    rows = dict(masses_rows(m, "Γ", gaas_gamma.energy_zero_eV, gaas_gamma.energy_zero_kind))
    assert "mass (isotropic)" in rows and not any(k.startswith("principal mass") for k in rows)
    assert "along" not in rows["mass (isotropic)"]
    assert "fractions of b1, b2, b3" in " ".join(rows) and "Cartesian, 1/Å" in " ".join(rows)
    doc = masses_results(gaas_gamma)
    entry = doc["masses"][0]["sum_over_states"]
    assert entry["anisotropy"] == "isotropic" and len(entry["principal"]) == 1
    assert entry["principal"][0]["axis"] is None
    assert doc["frames"]["k_frac"].startswith("fractions of the reciprocal")


def test_masses_text_has_no_negative_zero_and_no_unrelated_lines(gaas_gamma):
    m = gaas_gamma.entries[0]
    text = "\n".join(f"{a} {b}" for a, b in masses_rows(m, "Γ", gaas_gamma.energy_zero_eV,
                                                        gaas_gamma.energy_zero_kind))
    notes = masses_notes(gaas_gamma)
    assert "-0.0000" not in text + "\n".join(notes)
    # a point request implies nothing about k·p parameters at Γ's edges: no such line
    assert gaas_gamma.implied_kp is None
    assert not any("k·p parameters implied" in n for n in notes)


def test_each_warning_is_printed_once(gaas_gamma):
    m = gaas_gamma.entries[0]
    cp = dataclasses.replace(m.critical_point, warning="band far from the gap")
    warned = dataclasses.replace(m, critical_point=cp)
    twice = dataclasses.replace(gaas_gamma, entries=(warned, warned), locations=("Γ", "Γ"))
    assert [n for n in masses_notes(twice) if n.startswith("warning")] == [
        "warning: band far from the gap"]
