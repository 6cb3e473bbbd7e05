"""k·p models (two-, six-, eight-band) and k·p parameter files.

Published values: I. Vurgaftman, J. R. Meyer and L. R. Ram-Mohan, J. Appl. Phys. 89, 5815 (2001)
(the GaAs and InP parameter tables; every value recalled from memory, as in the bundled files);
J. M. Luttinger, Phys. Rev. 102, 1030 (1956) (hole masses of the 4×4 Γ8 Hamiltonian); E. O. Kane,
J. Phys. Chem. Solids 1, 249 (1957) (two-band nonparabolicity; from memory).
"""

from __future__ import annotations

import copy
import dataclasses
import itertools
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from test_material import to_toml

from bandpert import kp
from bandpert.data import MATERIALS_DIR
from bandpert.errors import InputError
from bandpert.input.kp_file import KPMaterial, load_kp_material, parse_kp_material
from bandpert.kp import (
    KPParameters,
    analyse_kp_material,
    bands_along,
    conduction_inverse_mass,
    eight_band_model,
    kane_F,
    kane_nonparabolicity,
    luttinger_from_modified,
    luttinger_inverse_masses,
    masses_at_gamma,
    material_model,
    modified_luttinger,
    nonparabolicity,
    six_band_model,
    split_off_inverse_mass,
    two_band_constants,
    two_band_energies_eV,
    two_band_model,
    two_band_nonparabolicity,
    unit_vector,
)
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C

MATERIALS = MATERIALS_DIR / "kp"
GAAS = load_kp_material(MATERIALS_DIR / "kp" / "gallium-arsenide.toml")
INP = load_kp_material(MATERIALS_DIR / "kp" / "indium-phosphide.toml")
BOTH = [GAAS, INP]
IDS = ["GaAs", "InP"]

#: Vurgaftman, Meyer & Ram-Mohan 2001, GaAs and InP tables (from memory): tabulated m_e, m_so.
TABLE = {"GaAs": {"m_e": 0.067, "m_so": 0.172}, "InP": {"m_e": 0.0795, "m_so": 0.21}}

FD_RTOL = 1e-7      # finite differences against exact values (measured: within 2e-9)
EXACT_RTOL = 1e-10  # analytic curvatures against closed forms

settings.register_profile("kp", max_examples=60, deadline=None)
settings.load_profile("kp")

vectors = st.lists(st.floats(-0.3, 0.3, allow_nan=False), min_size=3, max_size=3).map(np.array)
directions = vectors.filter(lambda v: np.linalg.norm(v) > 1e-3)


def _short(material: KPMaterial) -> str:
    return "GaAs" if material is GAAS else "InP"


# ---------------------------------------------------------------------------------------------
# the bundled files: masses against the tables and Luttinger's formulas
# ---------------------------------------------------------------------------------------------


def test_bundled_files_hold_the_recalled_values():
    p = GAAS.parameters  # Vurgaftman 2001, GaAs table (from memory)
    assert (p.Eg_eV, p.Delta_so_eV, p.Ep_eV, p.F) == (1.519, 0.341, 28.8, -1.94)
    assert (p.gamma1, p.gamma2, p.gamma3, GAAS.a_A) == (6.98, 2.06, 2.93, 5.65325)
    p = INP.parameters  # Vurgaftman 2001, InP table (from memory)
    assert (p.Eg_eV, p.Delta_so_eV, p.Ep_eV, p.F) == (1.4236, 0.108, 20.7, -1.31)
    assert (p.gamma1, p.gamma2, p.gamma3, INP.a_A) == (5.08, 1.60, 2.10, 5.8697)
    for m in BOTH:
        assert "from memory" in m.source
        assert m.reference_masses_m0 == {"m_e_m0": TABLE[_short(m)]["m_e"],
                                         "m_so_m0": TABLE[_short(m)]["m_so"]}
        assert m.models == ("two-band", "six-band", "eight-band")


@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_eight_band_conduction_mass_matches_the_table(material):
    p = material.parameters
    model = material_model(material, "eight-band")
    for method in ("analytic", "finite-difference"):
        m_e = masses_at_gamma(model, "001", method).of("conduction")
        # Vurgaftman 2001 (from memory): m_e = 0.067 (GaAs), 0.0795 (InP), within 2 %
        assert m_e == pytest.approx(TABLE[_short(material)]["m_e"], rel=0.02)
        # Vurgaftman 2001, m0/m_e = (1 + 2F) + (Ep/3)(2/Eg + 1/(Eg + Δ)) (from memory)
        assert 1 / m_e == pytest.approx(conduction_inverse_mass(p.Eg_eV, p.Delta_so_eV,
                                                                p.Ep_eV, p.F), rel=FD_RTOL)
    # the conduction band is isotropic in this model (no B term): common practice, no source
    for d in ("110", "111", "123"):
        assert masses_at_gamma(model, d).of("conduction") == pytest.approx(
            masses_at_gamma(model, "001").of("conduction"), rel=EXACT_RTOL)


@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_eight_band_split_off_mass_matches_the_table(material):
    p = material.parameters
    m_so = masses_at_gamma(material_model(material, "eight-band"), "001", "finite-difference").of(
        "split-off")
    # Vurgaftman 2001 (from memory): m_so = 0.172 (GaAs), 0.21 (InP), within 2 %
    # (measured: 0.1718 and 0.2111, i.e. -0.1 % and +0.5 %)
    assert m_so == pytest.approx(TABLE[_short(material)]["m_so"], rel=0.02)
    # γ1 − Ep Δ/[3 Eg (Eg + Δ)]: second order in P through Γ6 (Vurgaftman 2001, from memory)
    expected = p.gamma1 - p.Ep_eV * p.Delta_so_eV / (3 * p.Eg_eV * (p.Eg_eV + p.Delta_so_eV))
    assert 1 / m_so == pytest.approx(expected, rel=FD_RTOL)
    assert split_off_inverse_mass(p, "eight-band") == pytest.approx(expected, rel=1e-14)


#: The six-band split-off mass 1/γ1 misses the table: the 2 % target does NOT hold for it.
#: GaAs 1/6.98 = 0.1433 vs 0.172 (-16.7 %); InP 1/5.08 = 0.1969 vs 0.21 (-6.3 %).
SIX_BAND_SO_MISS = {"GaAs": -0.167, "InP": -0.062}


@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_six_band_split_off_mass_is_one_over_gamma1_and_misses_the_table(material):
    p = material.parameters
    m_so = masses_at_gamma(material_model(material, "six-band"), "111", "finite-difference").of(
        "split-off")
    # six-band model: m0/m_so = γ1 exactly (the Γ8–Γ7 coupling is of order k²; Luttinger &
    # Kohn, Phys. Rev. 97, 869 (1955), from memory)
    assert 1 / m_so == pytest.approx(p.gamma1, rel=FD_RTOL)
    assert split_off_inverse_mass(p, "six-band") == p.gamma1
    # against Vurgaftman 2001 (from memory) it is off by more than 2 %: recorded, not hidden
    miss = m_so / TABLE[_short(material)]["m_so"] - 1
    assert miss == pytest.approx(SIX_BAND_SO_MISS[_short(material)], abs=0.002)
    assert abs(miss) > 0.02


@pytest.mark.parametrize("name", ["six-band", "eight-band"])
@pytest.mark.parametrize("material", BOTH, ids=IDS)
@pytest.mark.parametrize(("direction", "gamma"), [("001", "gamma2"), ("111", "gamma3")])
def test_hole_masses_along_001_and_111(material, name, direction, gamma):
    p = material.parameters
    g = getattr(p, gamma)
    model = material_model(material, name)
    fd = masses_at_gamma(model, direction, "finite-difference")
    exact = masses_at_gamma(model, direction)
    # Source: Luttinger 1956: m0/m_hh,lh = γ1 ∓ 2γ2 along [001], γ1 ∓ 2γ3 along [111]; in the eight-
    # band model the light hole's Ep/Eg share plus the modified γ' must add up to the same
    assert fd.of("heavy hole") == pytest.approx(1 / (p.gamma1 - 2 * g), rel=FD_RTOL)
    assert fd.of("light hole") == pytest.approx(1 / (p.gamma1 + 2 * g), rel=FD_RTOL)
    assert exact.of("heavy hole") == pytest.approx(1 / (p.gamma1 - 2 * g), rel=EXACT_RTOL)
    assert exact.of("light hole") == pytest.approx(1 / (p.gamma1 + 2 * g), rel=EXACT_RTOL)
    # hole bands curve downward: the sign is kept in the inverse mass (CONVENTIONS.md)
    holes = [i for i, b in enumerate(fd.band_names) if b.endswith("hole")]
    assert np.all(fd.inverse_mass_m0[holes] < 0)


def test_eight_band_gaas_heavy_hole_warping():
    p = GAAS.parameters
    model = material_model(GAAS, "eight-band")
    g1, g2, g3 = p.gamma1, p.gamma2, p.gamma3
    # Source: Luttinger 1956 (warping): [100] γ1 − 2γ2, [110] γ1 − √(γ2² + 3γ3²), [111] γ1 − 2γ3
    expected = {"100": g1 - 2 * g2, "110": g1 - math.sqrt(g2**2 + 3 * g3**2), "111": g1 - 2 * g3}
    for direction, inverse in expected.items():
        fd = masses_at_gamma(model, direction, "finite-difference")
        assert fd.of("heavy hole") == pytest.approx(1 / inverse, rel=FD_RTOL)
    heavy = [1 / expected[d] for d in ("100", "110", "111")]
    assert heavy == sorted(heavy)  # 0.350, 0.665, 0.893: heavier towards [111]


@pytest.mark.parametrize("name", ["six-band", "eight-band"])
@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_light_and_heavy_holes_along_110_are_exact(material, name):
    """Along [110] the 4×4 Luttinger Hamiltonian gives γ1 ∓ √(γ2² + 3γ3²) exactly, without any
    spherical average (Luttinger 1956: the cubic invariant is k⁴/4 there)."""
    p = material.parameters
    root = math.sqrt(p.gamma2**2 + 3 * p.gamma3**2)
    fd = masses_at_gamma(material_model(material, name), "110", "finite-difference")
    assert fd.of("heavy hole") == pytest.approx(1 / (p.gamma1 - root), rel=FD_RTOL)
    assert fd.of("light hole") == pytest.approx(1 / (p.gamma1 + root), rel=FD_RTOL)


@given(direction=directions)
def test_hole_masses_in_any_direction_follow_luttinger(direction):
    for material in BOTH:
        p = material.parameters
        hh, lh = luttinger_inverse_masses(p.gamma1, p.gamma2, p.gamma3, direction)
        six = masses_at_gamma(material_model(material, "six-band"), direction)
        eight = masses_at_gamma(material_model(material, "eight-band"), direction)
        for result in (six, eight):
            # Source: Luttinger 1956, eigenvalues of the 4×4 Γ8 Hamiltonian in any direction
            assert result.of("heavy hole") == pytest.approx(1 / hh, rel=1e-9)
            assert result.of("light hole") == pytest.approx(1 / lh, rel=1e-9)
        # eliminating Γ6 from the eight-band model gives back the six-band Γ8 block at order
        # k² (Löwdin partitioning; common practice, no source): the conversion is right
        np.testing.assert_allclose(eight.inverse_mass_m0[2:6], six.inverse_mass_m0[2:6],
                                   rtol=1e-9)


def test_modified_parameters_and_back():
    p = GAAS.parameters
    g = modified_luttinger(p.gamma1, p.gamma2, p.gamma3, p.Eg_eV, p.Ep_eV)
    # γ1' = γ1 − Ep/(3Eg), γ2,3' = γ2,3 − Ep/(6Eg) (Vurgaftman 2001, from memory)
    d = p.Ep_eV / (6 * p.Eg_eV)
    assert g == pytest.approx((p.gamma1 - 2 * d, p.gamma2 - d, p.gamma3 - d), rel=1e-14)
    assert g == pytest.approx((0.6601, -1.1000, -0.2300), abs=1e-4)
    assert luttinger_from_modified(*g, p.Eg_eV, p.Ep_eV) == pytest.approx(
        (p.gamma1, p.gamma2, p.gamma3), rel=1e-14)
    assert p.modified_gammas() == g


def test_kane_F_inverts_the_conduction_mass():
    p = GAAS.parameters
    f = kane_F(0.067, p.Eg_eV, p.Delta_so_eV, p.Ep_eV)
    assert 1 / conduction_inverse_mass(p.Eg_eV, p.Delta_so_eV, p.Ep_eV, f) == pytest.approx(0.067)
    assert f == pytest.approx(p.F, abs=0.01)  # the table's F reproduces its m_e (Vurgaftman 2001)


# ---------------------------------------------------------------------------------------------
# structure: basis, Hermiticity, Kramers pairs, time reversal, cubic symmetry
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_gamma_levels_in_the_documented_order(material):
    p = material.parameters
    eight = material_model(material, "eight-band")
    expected = [p.Eg_eV] * 2 + [0.0] * 4 + [-p.Delta_so_eV] * 2  # Γ6, Γ8, Γ7 (basis order)
    np.testing.assert_allclose(eight.hamiltonian_eV([0, 0, 0])[0], np.diag(expected), atol=1e-14)
    np.testing.assert_allclose(material_model(material, "six-band").hamiltonian_eV([0, 0, 0])[0],
                               np.diag(expected[2:]), atol=1e-14)
    assert eight.basis_labels[0] == "Γ6 +1/2" and eight.basis_labels[-1] == "Γ7 -1/2"
    u = kp.cartesian_basis_matrix("eight-band")
    np.testing.assert_allclose(u.conj().T @ u, np.eye(8), atol=1e-14)


def _documented_matrix(p: KPParameters, k: np.ndarray) -> np.ndarray:
    """The eight-band matrix exactly as printed in the kp module docstring."""
    kx, ky, kz = k
    g1, g2, g3 = p.modified_gammas()
    kp_, km = kx + 1j * ky, kx - 1j * ky
    k2 = kx * kx + ky * ky + kz * kz
    pp = C * g1 * k2
    q = C * g2 * (kx**2 + ky**2 - 2 * kz**2)
    r = math.sqrt(3) * C * (g2 * (kx**2 - ky**2) - 2j * g3 * kx * ky)
    s = 2 * math.sqrt(3) * C * g3 * kz * km
    h = np.zeros((8, 8), dtype=complex)
    h[2:6, 2:6] = [[-pp - q, s, r, 0], [np.conj(s), -pp + q, 0, r],
                   [np.conj(r), 0, -pp + q, -s], [0, np.conj(r), -np.conj(s), -pp - q]]
    h[6, 6] = h[7, 7] = -(pp + p.Delta_so_eV)
    h[2:6, 6:8] = [[-s / math.sqrt(2), -math.sqrt(2) * r],
                   [-math.sqrt(2) * q, math.sqrt(1.5) * s],
                   [math.sqrt(1.5) * np.conj(s), math.sqrt(2) * q],
                   [math.sqrt(2) * np.conj(r), -np.conj(s) / math.sqrt(2)]]
    big_p = math.sqrt(p.Ep_eV * C)
    r2, r3, r6 = math.sqrt(2), math.sqrt(3), math.sqrt(6)
    h[0, 2:] = 1j * big_p * np.array([-kp_ / r2, math.sqrt(2 / 3) * kz, km / r6, 0,
                                      -kz / r3, -km / r3])
    h[1, 2:] = 1j * big_p * np.array([0, -kp_ / r6, math.sqrt(2 / 3) * kz, km / r2,
                                      -kp_ / r3, kz / r3])
    h[0, 0] = h[1, 1] = p.Eg_eV + C * (1 + 2 * p.F) * k2
    upper = np.triu(h, 1)
    return np.diag(np.diag(h)) + upper + upper.conj().T


@given(k=vectors)
def test_matrix_is_the_documented_one(k):
    np.testing.assert_allclose(material_model(GAAS, "eight-band").hamiltonian_eV(k)[0],
                               _documented_matrix(GAAS.parameters, k), atol=1e-12)


def _models():
    return [material_model(m, name) for m in BOTH
            for name in ("two-band", "six-band", "eight-band")]


@given(k=st.lists(vectors, min_size=1, max_size=5).map(np.array))
def test_hermitian_and_kramers_pairs(k):
    for model in _models():
        h = model.hamiltonian_eV(k)
        assert h.shape == (len(k), model.size, model.size)
        np.testing.assert_allclose(h, np.swapaxes(h, 1, 2).conj(), rtol=0, atol=1e-12)
        if model.name == "two-band":
            continue  # spinless 2×2: each level stands for a Kramers pair
        e = model.energies_eV(k)
        # Kramers pairs: time reversal with the (effective) inversion symmetry of a model
        # without B or k-linear terms (common practice, no source)
        np.testing.assert_allclose(e[:, 0::2], e[:, 1::2], rtol=0, atol=1e-9)


@given(k=vectors)
def test_time_reversal(k):
    theta = np.kron(np.eye(4), np.array([[0, -1], [1, 0]]))  # 𝟙 ⊗ (−iσ_y), then conjugation
    for name, size in (("six-band", 6), ("eight-band", 8)):
        u = kp.cartesian_basis_matrix(name)
        t = u.conj().T @ theta[:size, :size] @ u.conj()
        for material in BOTH:
            model = material_model(material, name)
            # Θ H(k) Θ⁻¹ = H(−k) for real orbitals (common practice, no source)
            np.testing.assert_allclose(t @ model.hamiltonian_eV(k)[0].conj() @ t.conj().T,
                                       model.hamiltonian_eV(-k)[0], atol=1e-12)
    for model in _models():
        np.testing.assert_allclose(model.energies_eV(k), model.energies_eV(-k), atol=1e-10)


@given(k=vectors, perm=st.permutations([0, 1, 2]),
       signs=st.lists(st.sampled_from([-1.0, 1.0]), min_size=3, max_size=3))
def test_cubic_symmetry(k, perm, signs):
    """E(k) is invariant under permutations and sign changes of the components of k (the 48
    operations of O_h; common practice, no source)."""
    image = np.array(signs) * k[list(perm)]
    for model in _models():
        np.testing.assert_allclose(model.energies_eV(image), model.energies_eV(k), atol=1e-10)


@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_no_level_in_the_gap_out_to_the_zone_edge(material):
    """The module docstring's claim for the bundled values: with 1 + 2F < 0 and γ1' + 2γ2' < 0
    the far bands are unphysical, yet no level enters (0, Eg) for |k| ≤ 2π/a."""
    model = material_model(material, "eight-band")
    rng = np.random.default_rng(7)
    u = rng.normal(size=(4000, 3))
    k = u / np.linalg.norm(u, axis=1)[:, None] * rng.uniform(0, 2 * math.pi / material.a_A,
                                                              size=(4000, 1))
    e = model.energies_eV(k)
    assert e[:, 5].max() <= 1e-9 and e[:, 6].min() >= material.parameters.Eg_eV - 1e-9


# ---------------------------------------------------------------------------------------------
# two-band model and nonparabolicity
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("remote", ["fitted", "free-electron"])
@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_two_band_closed_form(material, remote):
    model = material_model(material, "two-band", remote=remote)
    k = np.linspace(0, 0.5, 60)[:, None] * unit_vector([1, 2, 2])
    # Kane 1957 (two-band secular equation, from memory)
    closed = two_band_energies_eV(np.linalg.norm(k, axis=1), *two_band_constants(model))
    np.testing.assert_allclose(model.energies_eV(k), closed, atol=1e-12)


@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_two_band_masses(material):
    p = material.parameters
    masses = masses_at_gamma(material_model(material, "two-band"), "111", "finite-difference")
    # built to carry the eight-band (source: Vurgaftman 2001) conduction mass and the spherical
    # Luttinger light-hole mass 1/(γ1 + 2γ̄), γ̄ = (2γ2 + 3γ3)/5 (Lipari & Baldereschi 1970)
    assert 1 / masses.of("conduction") == pytest.approx(
        conduction_inverse_mass(p.Eg_eV, p.Delta_so_eV, p.Ep_eV, p.F), rel=FD_RTOL)
    assert 1 / masses.of("light hole") == pytest.approx(
        p.gamma1 + 2 * (2 * p.gamma2 + 3 * p.gamma3) / 5, rel=FD_RTOL)


@pytest.mark.parametrize("material", BOTH, ids=IDS)
def test_two_band_nonparabolicity(material):
    bare = material_model(material, "two-band", remote="free-electron")
    fit = nonparabolicity(bare)
    # Kane 1957 (from memory): α = (1 − m*/m0)²/Eg for the bare two-band model
    assert fit.alpha_per_eV == pytest.approx(
        kane_nonparabolicity(fit.edge_mass_m0, material.parameters.Eg_eV), rel=1e-6)
    fitted = material_model(material, "two-band")
    assert nonparabolicity(fitted).alpha_per_eV == pytest.approx(
        two_band_nonparabolicity(*two_band_constants(fitted)), rel=1e-6)
    # m*(E) = m*(1 + αE + O(E²)) at small E (follows from E(1 + αE) = ħ²k²/2m*)
    small = fit.carrier_energy_eV[1:6]
    np.testing.assert_allclose(fit.energy_mass_m0[1:6] / fit.edge_mass_m0,
                               1 + fit.alpha_per_eV * small, rtol=1e-5)
    assert fit.energy_mass_m0[0] == fit.edge_mass_m0


def test_eight_band_nonparabolicity():
    """The eight-band GaAs conduction band along [001]: α = 0.560 /eV, a little below the
    two-band (1 − m*/m0)²/Eg = 0.573 /eV (Kane 1957, from memory). Its k⁴ terms are warped by
    the valence anisotropy γ3 − γ2 (measured: 0.560, 0.688, 0.731 /eV along [001], [110],
    [111]); with γ3 = γ2 the model is spherical and α the same in every direction."""
    model = material_model(GAAS, "eight-band")
    alpha = {d: nonparabolicity(model, d).alpha_per_eV for d in ("001", "110", "111")}
    kane = kane_nonparabolicity(0.067, 1.519)
    assert alpha["001"] == pytest.approx(0.560, abs=0.001)
    assert 0.9 * kane < alpha["001"] < kane
    assert alpha["110"] == pytest.approx(0.688, abs=0.001)
    assert alpha["111"] == pytest.approx(0.731, abs=0.001)
    spherical = eight_band_model(dataclasses.replace(GAAS.parameters, gamma3=2.06))
    iso = [nonparabolicity(spherical, d).alpha_per_eV for d in ("001", "110", "111")]
    assert iso == pytest.approx([alpha["001"]] * 3, rel=1e-6)


def test_analysis_names_both_nonparabolicities():
    """The analysis of the GaAs file reports the model's own α and Kane's (1 − m*/m0)²/Eg
    apart: with m* = 0.067 and Eg = 1.519 eV (source: Vurgaftman, Meyer & Ram-Mohan, J. Appl.
    Phys. 89, 5815 (2001), Table III) Kane's is 0.573 /eV (source: Kane, J. Phys. Chem. Solids
    1, 249 (1957); from memory); the two-band model with remote-band terms gives 0.488 /eV."""
    result = analyse_kp_material(GAAS, k_max_frac=0.05)
    assert tuple(result.models) == GAAS.models
    two, eight = result.models["two-band"], result.models["eight-band"]
    assert two.kane_alpha_per_eV == pytest.approx((1 - 0.067) ** 2 / 1.519, rel=1e-3)
    assert eight.kane_alpha_per_eV == pytest.approx(0.573, abs=0.001)
    assert two.nonparabolicity.alpha_per_eV == pytest.approx(0.488, abs=0.001)
    assert "Kane" in two.kane_alpha_source and "1957" in two.kane_alpha_source
    assert result.models["six-band"].nonparabolicity is None
    assert result.models["six-band"].kane_alpha_per_eV is None
    # masses along [001] in the analysis are the six-band model's γ1 ∓ 2γ2 (Luttinger 1956)
    p = GAAS.parameters
    assert result.models["six-band"].masses_m0["[001]"]["heavy hole"] == pytest.approx(
        1 / (p.gamma1 - 2 * p.gamma2), rel=1e-9)
    assert result.models["eight-band"].lines["[111]"].k_frac[-1] == pytest.approx(0.05)
    with pytest.raises(InputError):
        analyse_kp_material(GAAS, k_max_frac=0.7)


@given(k=vectors, turn=directions)
def test_spherical_parameters_give_isotropic_bands(k, turn):
    """γ2 = γ3 makes the Luttinger and Kane Hamiltonians spherical (Baldereschi & Lipari, Phys.
    Rev. B 8, 2697 (1973), from memory): E depends on |k| only."""
    p = dataclasses.replace(INP.parameters, gamma3=INP.parameters.gamma2)
    rotated = unit_vector(turn) * np.linalg.norm(k)
    for model in (six_band_model(p), eight_band_model(p)):
        np.testing.assert_allclose(model.energies_eV(rotated), model.energies_eV(k),
                                   atol=1e-9)


# ---------------------------------------------------------------------------------------------
# bands along a direction, directions, errors in code
# ---------------------------------------------------------------------------------------------


def test_bands_along_a_direction():
    model = material_model(GAAS, "eight-band")
    b = bands_along(model, "[111]", k_max_frac=0.1, n_k=11, both_sides=True)
    assert b.energies_eV.shape == (11, 8) and b.k_cart_invA.shape == (11, 3)
    two_pi_a = 2 * math.pi / 5.65325
    assert b.k_invA[-1] == pytest.approx(0.1 * two_pi_a)
    np.testing.assert_allclose(b.k_frac, b.k_invA / two_pi_a)
    np.testing.assert_allclose(b.direction, np.ones(3) / math.sqrt(3))
    np.testing.assert_allclose(b.energies_eV, b.energies_eV[::-1], atol=1e-10)
    assert b.band_names[-1] == "conduction" and "valence-band top" in b.energy_zero
    assert bands_along(six_band_model(GAAS.parameters), "001", k_max_invA=0.1).k_frac is None
    with pytest.raises(ValueError, match="lattice_constant_A"):
        bands_along(six_band_model(GAAS.parameters), "001", k_max_frac=0.1)
    with pytest.raises(ValueError, match="exactly one"):
        bands_along(model, "001")


@pytest.mark.parametrize(("text", "vector"), [("001", [0, 0, 1]), ("[110]", [1, 1, 0]),
                                              ("1-10", [1, -1, 0]), ("[1, 1, 1]", [1, 1, 1])])
def test_directions_from_indices(text, vector):
    np.testing.assert_allclose(unit_vector(text), np.array(vector) / np.linalg.norm(vector))


@pytest.mark.parametrize("bad", ["01", "abc", [0, 0, 0], [1, 2], [1, np.nan, 0]])
def test_bad_directions(bad):
    with pytest.raises(ValueError):
        unit_vector(bad)


def test_models_refuse_missing_parameters_in_code():
    with pytest.raises(ValueError, match="Ep_eV"):
        eight_band_model(KPParameters(Eg_eV=1.0, Delta_so_eV=0.3, F=0.0, gamma1=6, gamma2=2,
                                      gamma3=2))
    with pytest.raises(ValueError, match="remote"):
        two_band_model(GAAS.parameters, remote="none")
    with pytest.raises(ValueError, match="no band named"):
        masses_at_gamma(material_model(GAAS, "six-band"), "001").of("conduction")


# ---------------------------------------------------------------------------------------------
# the loader
# ---------------------------------------------------------------------------------------------

FILE_NAME = "broken-kp.toml"
VALID = tomllib.loads((MATERIALS_DIR / "kp" / "gallium-arsenide.toml").read_text(encoding="utf-8"))


def _put(*path_and_value):
    *path, value = path_and_value

    def change(doc):
        node = doc
        for p in path[:-1]:
            node = node[p]
        if value is DROP:
            del node[path[-1]]
        else:
            node[path[-1]] = copy.deepcopy(value)
    return change


DROP = object()

#: (id, mutation of the bundled GaAs document, dotted key the message must name)
CASES = [
    ("missing-name", _put("name", DROP), "name"),
    ("empty-name", _put("name", " "), "name"),
    ("missing-source", _put("source", DROP), "source"),
    ("empty-source", _put("source", ""), "source"),
    ("note-not-string", _put("note", 3), "note"),
    ("unknown-top-key", _put("Eg_eV", 1.5), "Eg_eV"),
    ("models-string", _put("models", "eight-band"), "models"),
    ("models-empty", _put("models", []), "models"),
    ("models-number", _put("models", [8]), "models"),
    ("models-unknown", _put("models", ["four-band"]), "models"),
    ("models-twice", _put("models", ["six-band", "six-band"]), "models"),
    ("missing-lattice", _put("lattice", DROP), "lattice"),
    ("lattice-not-table", _put("lattice", 5.65), "lattice"),
    ("missing-structure", _put("lattice", "structure", DROP), "lattice.structure"),
    ("unknown-structure", _put("lattice", "structure", "wurtzite"), "lattice.structure"),
    ("missing-a", _put("lattice", "a_A", DROP), "lattice.a_A"),
    ("negative-a", _put("lattice", "a_A", -5.6), "lattice.a_A"),
    ("a-as-string", _put("lattice", "a_A", "5.65"), "lattice.a_A"),
    ("a-in-nm", _put("lattice", "a_nm", 0.565), "lattice.a_nm"),
    ("missing-parameters", _put("parameters", DROP), "parameters"),
    ("unitless-gap", _put("parameters", "Eg", 1.519), "parameters.Eg"),
    ("gap-as-string", _put("parameters", "Eg_eV", "1.519 eV"), "parameters.Eg_eV"),
    ("gap-zero", _put("parameters", "Eg_eV", 0.0), "parameters.Eg_eV"),
    ("gap-negative", _put("parameters", "Eg_eV", -0.3), "parameters.Eg_eV"),
    ("gap-infinite", _put("parameters", "Eg_eV", math.inf), "parameters.Eg_eV"),
    ("delta-negative", _put("parameters", "Delta_so_eV", -0.1), "parameters.Delta_so_eV"),
    ("ep-negative", _put("parameters", "Ep_eV", -28.8), "parameters.Ep_eV"),
    ("ep-nan", _put("parameters", "Ep_eV", math.nan), "parameters.Ep_eV"),
    ("f-boolean", _put("parameters", "F", True), "parameters.F"),
    ("gamma1-array", _put("parameters", "gamma1", [6.98]), "parameters.gamma1"),
    ("gamma1-too-small", _put("parameters", "gamma1", 5.0), "parameters.gamma3"),
    ("gamma2-too-large", _put("parameters", "gamma2", 4.0), "parameters.gamma2"),
    ("modified-gammas", lambda d: d["parameters"].update(gamma1=0.66, gamma2=-1.1, gamma3=-0.23),
     "parameters.gamma2"),
    ("eight-band-no-ep", _put("parameters", "Ep_eV", DROP), "parameters.Ep_eV"),
    ("six-band-no-gamma3", _put("parameters", "gamma3", DROP), "parameters.gamma3"),
    ("conduction-curves-down", _put("parameters", "F", -10.0), "parameters.F"),
    ("nothing-complete", lambda d: (d.pop("models"), d["parameters"].pop("Delta_so_eV")),
     "parameters"),
    ("reference-not-table", _put("reference", 0.067), "reference"),
    ("reference-unknown", _put("reference", "m_hh_m0", 0.35), "reference.m_hh_m0"),
    ("reference-negative", _put("reference", "m_e_m0", -0.067), "reference.m_e_m0"),
    ("reference-string", _put("reference", "m_so_m0", "0.172"), "reference.m_so_m0"),
    ("conduction-no-state", _put("conduction", {"lowest_state": "Γ15", "lowest_eV": 3.4}),
     "conduction.state"),
    ("conduction-energy-alone", _put("conduction", {"state": "Γ2′", "lowest_eV": 3.4}),
     "conduction.lowest_eV"),
    ("conduction-state-alone", _put("conduction", {"state": "Γ2′", "lowest_state": "Γ15"}),
     "conduction.lowest_eV"),
    ("conduction-negative", _put("conduction", {"state": "Γ2′", "lowest_state": "Γ15",
                                                "lowest_eV": -3.4}), "conduction.lowest_eV"),
]


def _write(tmp_path: Path, doc: dict) -> Path:
    path = tmp_path / FILE_NAME
    path.write_text(to_toml(doc), encoding="utf-8")
    return path


@pytest.mark.parametrize(("mutate", "key"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_malformed_kp_file_is_refused(mutate, key, tmp_path):
    doc = copy.deepcopy(VALID)
    mutate(doc)
    path = _write(tmp_path, doc)
    with pytest.raises(InputError) as info:
        load_kp_material(path)
    message = str(info.value)
    assert info.value.key == key
    assert message.startswith(f"{path}: {key}: "), message
    assert "\n" not in message


@pytest.mark.parametrize(("content", "words"), [
    (None, "file not found"), (b'name = "GaAs\n', "not valid TOML"),
    (b'name = "caf\xe9"\n', "not UTF-8 text (invalid byte 0xe9 on line 1)")])
def test_unreadable_kp_file_is_refused(content, words, tmp_path):
    path = tmp_path / FILE_NAME
    if content is not None:
        path.write_bytes(content)
    with pytest.raises(InputError) as info:
        load_kp_material(path)
    assert str(info.value).startswith(f"{path}: ") and words in str(info.value)
    with pytest.raises(InputError, match="is a folder"):
        load_kp_material(tmp_path)


def test_table_of_bad_files_is_unique():
    assert len({c[0] for c in CASES}) == len(CASES) >= 30


def test_models_default_to_what_the_parameters_complete(tmp_path):
    doc = copy.deepcopy(VALID)
    del doc["models"]
    for key in ("Eg_eV", "Ep_eV", "F"):
        del doc["parameters"][key]
    material = load_kp_material(_write(tmp_path, doc))
    assert material.models == ("six-band",)
    assert material_model(material).name == "six-band"
    with pytest.raises(InputError) as info:
        material_model(material, "eight-band")
    assert info.value.key == "models" and str(info.value).startswith(str(tmp_path))
    with pytest.raises(InputError, match="unknown k·p model"):
        material_model(material, "four-band")


def test_parse_refuses_a_non_table():
    with pytest.raises(InputError, match="expected a document"):
        parse_kp_material([1, 2], "list.toml")  # type: ignore[arg-type]


def test_every_bundled_kp_file_loads():
    files = sorted(MATERIALS.glob("*.toml"))
    assert len(files) >= 2
    for path in files:
        material = load_kp_material(path)
        for name in material.models:
            model = material_model(material, name)
            assert model.lattice_constant_A == material.a_A
            for a, b in itertools.pairwise(model.gamma_energies_eV):
                assert a <= b
