"""Spin–orbit coupling in the plane-wave model: spinor plane waves and the empirical term."""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
from conftest import bundled
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.special import spherical_jn

from bandpert.errors import InputError
from bandpert.input.kp_file import parse_kp_material
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.kp.hamiltonians import eight_band_model
from bandpert.kp.parameters import unit_vector
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.kp_from_planewave import (
    extract_kp_parameters,
    kp_material_text,
    spin_orbit_valence_top,
)
from bandpert.planewave.cutoff import choose_cutoff
from bandpert.planewave.model import build_k_centred_model, build_model, centred_model
from bandpert.planewave.solver import exact_energies, exact_states
from bandpert.planewave.spinorbit import radial_factor

#: Slater-type core p orbitals of the bundled files (n, ζ in Å⁻¹; Slater's rules).
CORE = {"Si": (2, 9.307), "Ge": (3, 13.07), "Ga": (3, 12.44), "As": (3, 13.70)}

#: A modest cutoff for the identities that hold at any basis (they do not need convergence).
SMALL_CUTOFF_EV = 60.0


def with_spin_orbit(name: str, strengths_eV: dict[str, float]):
    """A bundled spinless file with a spin_orbit table added."""
    doc = read_toml_document(bundled(name).file)
    doc["spin_orbit"] = {"species": {
        s: {"strength_eV": lam, "core_shell": CORE[s][0], "slater_exponent_invA": CORE[s][1]}
        for s, lam in strengths_eV.items()}}
    return parse_material(doc, "<test>")


def unit(material) -> float:
    return 2.0 * np.pi / material.a_A


@pytest.mark.parametrize("shell", [2, 3, 4, 5])
def test_radial_factor_is_the_core_orbital_overlap(shell):
    # source: exact integral B(K) = ∫ j1(Kr) r^(n-1) e^(-ζr) r² dr / (K · lim_{K→0} of it / K),
    # by quadrature (scipy.integrate.quad, scipy.special.spherical_jn)
    zeta = 3.0
    limit = quad(lambda r: r / 3 * r ** (shell + 1) * np.exp(-zeta * r), 0, 80)[0]
    for k in (0.3, 2.0, 5.0, 9.0):
        integral = quad(lambda r, k=k: spherical_jn(1, k * r) * r ** (shell + 1)
                        * np.exp(-zeta * r), 0, 80, limit=400)[0]
        assert radial_factor(k, shell, zeta) == pytest.approx(integral / (k * limit), abs=1e-9)
    assert radial_factor(0.0, shell, zeta) == 1.0
    assert radial_factor(7.0, None, None) == 1.0


@pytest.mark.parametrize("name, species", [("silicon", ["Si"]), ("gallium-arsenide", ["Ga", "As"])])
def test_zero_strength_doubles_every_spinless_band(name, species):
    # source: exact identity: with λ = 0, H = 1₂ ⊗ (H0 + V), so each spinless level twice
    spinless = bundled(name)
    spinor = with_spin_orbit(name, dict.fromkeys(species, 0.0))
    rng = np.random.default_rng(1)
    k = rng.uniform(-1, 1, (6, 3)) * unit(spinless)
    for build in (build_k_centred_model, build_model):
        kwargs = {"spin_orbit": True} if build is build_model else {}
        e0 = exact_energies(build(spinless, SMALL_CUTOFF_EV), k, 8)
        e2 = exact_energies(build(spinor, SMALL_CUTOFF_EV, **kwargs), k, 16)
        assert np.max(np.abs(e2[:, 0::2] - e0)) < 1e-10
        assert np.max(np.abs(e2[:, 1::2] - e0)) < 1e-10


def test_spinor_hamiltonian_is_hermitian():
    # source: exact identity (S(-G) = S(G)*, K × K' = -K' × K)
    model = build_model(bundled("gallium-arsenide-spin-orbit"), SMALL_CUTOFF_EV, spin_orbit=True)
    h = model.hamiltonian(np.array([0.31, -0.12, 0.07]))
    assert h.shape == (2 * model.size, 2 * model.size)
    assert np.max(np.abs(h - h.conj().T)) < 1e-13


@settings(max_examples=8, deadline=None)
@given(st.sampled_from(["silicon-spin-orbit", "germanium-spin-orbit"]),
       st.lists(st.floats(-1.0, 1.0), min_size=3, max_size=3))
def test_kramers_pairs_in_centrosymmetric_crystals(name, k_frac):
    # source: Kramers' theorem with inversion: every band twofold at every k (common practice,
    # no source); nothing splits in Si or Ge
    material = bundled(name)
    k = np.array([k_frac]) * unit(material)
    e = exact_energies(build_k_centred_model(material, SMALL_CUTOFF_EV), k, 16)[0]
    assert np.max(np.abs(e[0::2] - e[1::2])) < 1e-9


@pytest.fixture(scope="module")
def gaas():
    material = bundled("gallium-arsenide-spin-orbit")
    return material, build_k_centred_model(material, SMALL_CUTOFF_EV)


def test_gaas_stays_in_pairs_at_gamma_x_l_and_along_100(gaas):
    # source: double-group representations of T_d: at Γ, X, L and along Δ every level is
    # (at least) twofold (Dresselhaus, Phys. Rev. 100, 580 (1955))
    material, model = gaas
    k = np.array([[0, 0, 0], [1, 0, 0], [0.5, 0.5, 0.5], [0.37, 0, 0], [0, 0.21, 0]])
    k = k * unit(material)
    e = exact_energies(model, k, 16)
    assert np.max(np.abs(e[:, 0::2] - e[:, 1::2])) < 1e-9


def test_gaas_conduction_splitting_is_cubic_along_110_and_zero_along_100_111(gaas):
    # source: G. Dresselhaus, Phys. Rev. 100, 580 (1955): the Γ6 band of zincblende splits as
    # k³ along [110] and not at all along [100] and [111]
    material, model = gaas
    cb = 8  # the lowest conduction pair at Γ (eight valence electrons, one per spinor band)
    steps = np.array([0.005, 0.01, 0.02])

    def splitting(direction):
        d = np.asarray(direction, float) / np.linalg.norm(direction)
        e = exact_energies(model, steps[:, None] * d * unit(material), 10)
        return e[:, cb + 1] - e[:, cb]

    s110 = splitting([1, 1, 0])
    assert np.all(s110 > 1e-7)
    exponent = np.polyfit(np.log(steps), np.log(s110), 1)[0]
    assert exponent == pytest.approx(3.0, abs=0.05)
    assert np.max(np.abs(splitting([1, 0, 0]))) < 1e-9
    assert np.max(np.abs(splitting([1, 1, 1]))) < 1e-9


@pytest.mark.parametrize("name, delta_eV", [
    ("silicon-spin-orbit", 0.044),           # source: O. Madelung, Semiconductors: Data
    ("germanium-spin-orbit", 0.29),          # Handbook (Springer 2004); from memory
    # source: Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), Table III.
    # With the atoms named right (As at +τ, the anion, see gallium-arsenide.toml) and λ fitted
    # to Δ0 the L3 splitting comes out at 0.593 Δ0 (0.585–0.621 for λ_Ga/λ_As from 0.2 to 1):
    # just below the 0.60 accepted here; measured about 0.68 (from memory)
    pytest.param("gallium-arsenide-spin-orbit", 0.341, marks=pytest.mark.xfail(
        strict=True, reason="model: L3 splitting 0.593 of Δ0 for GaAs, below 0.60")),
])
def test_bundled_split_off_energy_and_l3_ratio(name, delta_eV):
    material = bundled(name)
    cutoff = choose_cutoff(material.without_spin_orbit(), 8, None, False)
    model = build_k_centred_model(material, cutoff)
    e = exact_energies(model, np.array([[0, 0, 0], [0.5, 0.5, 0.5]]) * unit(material), 8)
    gamma, ell = e
    # Γ8 (fourfold) above Γ7 (twofold): the valence top is bands 4–7, the split-off pair 2–3
    assert np.ptp(gamma[4:8]) < 1e-9 and gamma[4] - gamma[3] > 0.0
    delta = gamma[4] - gamma[2]
    assert delta == pytest.approx(delta_eV, rel=0.02)
    # source: the L3 splitting is 2/3 of Δ0 for pure p states (P. Y. Yu and M. Cardona,
    # Fundamentals of Semiconductors, Springer, ch. 2); accepted between 0.60 and 0.72
    ratio = (ell[6] - ell[4]) / delta
    assert 0.60 <= ratio <= 0.72


def test_band_structure_counts_spinor_bands():
    # common practice, no source: eight valence electrons fill eight spinor bands
    bs = compute_band_structure(bundled("silicon-spin-orbit"), n_k=12, cutoff_eV=SMALL_CUTOFF_EV,
                                check_cutoff=False)
    assert bs.n_bands == 16
    assert bs.energy_zero_kind == "valence-band maximum"
    assert bs.edges is not None and bs.edges.gap_eV > 0.3


def test_spinless_computations_refuse_spin_orbit():
    # (the perturbative bands take spinor models: tests/test_perturbative_spinor.py)
    material = bundled("silicon-spin-orbit")
    with pytest.raises(InputError, match="spinless model") as info:
        build_model(material, SMALL_CUTOFF_EV)
    assert info.value.key == "spin_orbit"


BASE = {"name": "t", "source": "t", "lattice": {"type": "fcc", "a_A": 5.43},
        "atoms": [{"species": "Si", "position": [0.125] * 3},
                  {"species": "Si", "position": [-0.125] * 3}],
        "potential": {"form": "symmetric-antisymmetric", "unit": "Ry", "shells": [3, 8, 11],
                      "symmetric": [-0.21, 0.04, 0.08]}}


@pytest.mark.parametrize("table, key, words", [
    ({"species": {"Ge": {"strength_eV": 0.1}}}, "spin_orbit.species.Ge", "unknown species"),
    ({"species": {}}, "spin_orbit.species.Si", "missing spin-orbit parameters"),
    ({"species": {"Si": {"strength_eV": -0.1}}}, "spin_orbit.species.Si.strength_eV",
     "outside"),
    ({"species": {"Si": {"strength_eV": 0.1, "slater_exponent_invA": 9.0}}},
     "spin_orbit.species.Si.slater_exponent_invA", "without core_shell"),
    ({"species": {"Si": {"strength_eV": 0.1, "core_shell": 7, "slater_exponent_invA": 9.0}}},
     "spin_orbit.species.Si.core_shell", "too large"),
    ({"species": {"Si": {"strength_eV": 0.1, "core_shell": 2}}},
     "spin_orbit.species.Si.slater_exponent_invA", "missing"),
    ({"species": {"Si": {"strength_eV": 0.1, "core_shell": 2, "slater_exponent_invA": -3.0}}},
     "spin_orbit.species.Si.slater_exponent_invA", "outside"),
    ({"species": {"Si": {"strength_eV": "0.1"}}}, "spin_orbit.species.Si.strength_eV",
     "expected a number"),
    ({"species": {"Si": {"strength_Ry": 0.1}}}, "spin_orbit.species.Si", ""),
])
def test_bad_spin_orbit_tables_are_refused_in_one_line(table, key, words):
    with pytest.raises(InputError) as info:
        parse_material({**BASE, "spin_orbit": table}, "f.toml")
    text = str(info.value)
    assert info.value.key.startswith(key) and words in text and "\n" not in text


def test_spin_orbit_needs_three_dimensions():
    doc = {"name": "t", "source": "t", "lattice": {"type": "square", "a_A": 3.0},
           "atoms": [{"species": "X", "position": [0, 0]}], "potential": {"form": "empty"},
           "spin_orbit": {"species": {"X": {"strength_eV": 0.1}}}}
    with pytest.raises(InputError, match="needs a 3D lattice"):
        parse_material(doc, "f.toml")


def test_gaas_split_off_energy_with_the_anion_named_right():
    # source: Δ0 = 0.341 eV (Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001),
    # Table III); the L3 ratio of this file is the strict xfail above
    material = bundled("gallium-arsenide-spin-orbit")
    cutoff = choose_cutoff(material.without_spin_orbit(), 8, None, False)
    gamma = exact_energies(build_k_centred_model(material, cutoff), np.zeros((1, 3)), 8)[0]
    assert np.ptp(gamma[4:8]) < 1e-9
    assert gamma[4] - gamma[2] == pytest.approx(0.341, rel=0.02)


@pytest.fixture(scope="module")
def gaas_top():
    material = bundled("gallium-arsenide-spin-orbit")
    cutoff = choose_cutoff(material.without_spin_orbit(), 8, None, False)
    return material, cutoff, spin_orbit_valence_top(material, cutoff)


def test_gamma8_bands_follow_the_luttinger_form_along_110(gaas_top):
    # source: J. M. Luttinger, Phys. Rev. 102, 1030 (1956): along [110] the Γ8 masses are
    # m0/m = γ1 ∓ √(γ2² + 3γ3²) (CONVENTIONS.md); γ from [100] and [111] must predict [110],
    # and γ1 from [111] must equal γ1 from [100]
    _, _, top = gaas_top
    g1, g2, g3 = top.gammas
    root = np.sqrt(g2**2 + 3 * g3**2)
    assert 1 / top.heavy_hole_m0["110"] == pytest.approx(g1 - root, rel=2e-3)
    assert 1 / top.light_hole_m0["110"] == pytest.approx(g1 + root, rel=2e-3)
    assert top.gamma1_111 == pytest.approx(g1, rel=1e-3)


def test_gaas_conduction_mass_and_written_split_off_energy(gaas_top):
    material, cutoff, top = gaas_top
    # source: Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), Table III:
    # m_e = 0.067 m0 (not a fitted target here; within 15 %)
    assert top.conduction_m0 == pytest.approx(0.067, rel=0.15)
    extracted = extract_kp_parameters(material, build_model(material, cutoff, spin_orbit=True))
    assert extracted.parameters.Delta_so_eV == pytest.approx(top.delta_so_eV, abs=1e-12)
    assert extracted.parameters.Delta_so_eV == pytest.approx(0.341, rel=0.02)
    text = kp_material_text(material, extracted)
    assert "Delta_so_eV = 0.34" in text and "spin-orbit model" in text


def test_eight_band_model_read_back_reproduces_the_valence_bands(gaas_top):
    # source: the acceptance check: the eight-band model (Kane; Vurgaftman, Meyer &
    # Ram-Mohan 2001, Sec. II) read back from the written k·p file reproduces the plane-wave
    # valence bands (measured from Γ8) within 1 % at k = 0.02·2π/a along [100], [110], [111];
    # Kramers pairs averaged (the k·p model has no k-linear or cubic zincblende terms)
    material, cutoff, _ = gaas_top
    extracted = extract_kp_parameters(material, build_model(material, cutoff, spin_orbit=True))
    kp = parse_kp_material(tomllib.loads(kp_material_text(material, extracted)), "kp.toml")
    model = eight_band_model(kp.parameters, kp.a_A)
    pw = centred_model(material, cutoff, np.zeros(3), spin_orbit=True)
    top = exact_energies(pw, np.zeros((1, 3)), 8)[0, 7]
    for direction in ("100", "110", "111"):
        k = 0.02 * unit(material) * unit_vector(direction)
        e_pw = exact_energies(pw, k[None], 8)[0, 2:8] - top
        e_kp = np.sort(np.ravel(model.energies_eV(k[None])))[:6]
        pairs_pw = (e_pw[0::2] + e_pw[1::2]) / 2
        pairs_kp = (e_kp[0::2] + e_kp[1::2]) / 2
        assert np.max(np.abs(pairs_kp / pairs_pw - 1)) < 0.01


def test_exact_states_are_spinors_of_the_documented_layout():
    # common practice, no source: with λ = 0 an eigenvector is a pure spin-up or spin-down
    # spinor (or a mix within a degenerate pair); the spin-up weight of a pair sums to 1
    material = with_spin_orbit("silicon", {"Si": 0.0})
    model = build_k_centred_model(material, SMALL_CUTOFF_EV).at(np.zeros(3), spin_orbit=True)
    k = np.array([0.11, 0.05, 0.02])
    w, c = exact_states(model, k, 4)
    assert c.shape == (2 * model.size, 4)
    up = np.sum(np.abs(c[:model.size]) ** 2, axis=0)
    assert up[0] + up[1] == pytest.approx(1.0, abs=1e-10)
    assert np.allclose(w, exact_energies(model, k[None], 4)[0], atol=1e-10)
