"""The optical spectrum: the f-sum rule, ε2 = 0 for the empty lattice, ε2 ∝ V² for a weak
potential, Kramers–Kronig against an exact oscillator and against ε1(0) from the transitions,
the figure's text, and ``bandpert optics``."""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest
from conftest import bundled, make_material
from figure_cases import text_problems
from test_cli import assert_user_error, run

from bandpert.output.figures.optics import optics_figure
from bandpert.physics.optical_spectrum import optical_spectrum
from bandpert.physics.optics import kramers_kronig
from bandpert.physics.optics_velocity import velocities
from bandpert.physics.reduced_basis import build_reduced_basis
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C


@pytest.fixture(scope="module")
def silicon_all_bands():
    return optical_spectrum(bundled("silicon"), 12, cutoff_eV=60.0, all_bands=True)


def test_f_sum_rule_counts_the_valence_electrons(silicon_all_bands):
    # Thomas–Reiche–Kuhn f-sum rule ∫ω ε2 dω = (π/2) ω_p² with every band of the basis:
    # n_eff = 8 valence electrons per cell of silicon (Yu & Cardona, Fundamentals of
    # Semiconductors, Sec. 6.2, the f-sum rule); to 0.5 %
    r = silicon_all_bands
    assert r.n_eff_total == pytest.approx(8.0, rel=0.005)
    assert r.n_eff[-1] == pytest.approx(r.n_eff_interband, rel=1e-6)  # grid = discrete sum
    assert r.n_eff_intraband == 0.0


def test_f_sum_rule_with_spin_orbit_coupling():
    # spinor bands, one electron each, velocity (1/ħ)∂H/∂k with the spin–orbit term: the f-sum
    # (Yu & Cardona Sec. 6.2) holds the 8 valence electrons of gallium arsenide to 0.5 % with
    # every band of the basis (measured 7.983 at 12³; the sum rule of a k-dependent term gains
    # ⟨∂²H_so/∂k²⟩, negligible at the bundled λ)
    r = optical_spectrum(bundled("gallium-arsenide-spin-orbit"), 12, cutoff_eV=60.0,
                         all_bands=True)
    assert r.n_bands > 100  # spinor bands: twice the plane waves of the fixed set
    assert r.n_eff_total == pytest.approx(8.0, rel=0.005)
    # its exact reference, the effective-mass sum rule (bandpert.physics.optics_velocity):
    # 8 + the occupied states' (m0/ħ²)⟨∂²H_so/∂k²⟩, measured 8.0000 (that term is negligible)
    assert r.sum_rule == pytest.approx(8.0, abs=1e-3) and r.k_terms == ("spin-orbit",)


def test_spin_orbit_velocity_is_the_gradient_of_the_bands():
    # Hellmann–Feynman: ⟨n|∂H/∂k|n⟩ = ∂E_n/∂k for a non-degenerate band (H. Hellmann (1937),
    # R. P. Feynman, Phys. Rev. 56, 340 (1939)); with spin–orbit coupling 30 times the bundled
    # one the velocity without ∂H_so/∂k misses it, with it (the optics path, matrix differences
    # of the model's H(k) projected on the reduced basis) the two agree to 1e-6 eV·Å (6e-8)
    material = bundled("gallium-arsenide-spin-orbit")
    so = material.spin_orbit
    strong = dataclasses.replace(material, spin_orbit=dataclasses.replace(so, species={
        s: dataclasses.replace(v, strength_eV=30 * v.strength_eV) for s, v in so.species.items()}))
    model = build_reduced_basis(strong, 50.0, 8)
    k = np.array([[0.31, -0.22, 0.17], [0.05, 0.4, -0.3]])
    for patch, rows in model.groups(k):
        e, v = patch.eigensystem(k[rows], 8)
        step = 1e-5 * np.eye(3)
        gradient = np.stack([(patch.eigenvalues(k[rows] + step[i], 8)
                              - patch.eigenvalues(k[rows] - step[i], 8)) / 2e-5
                             for i in range(3)], axis=1)
        momentum, _ = velocities(patch, k[rows], v, 1e-3 * 2 * np.pi / strong.a_A)
        velocity = 2 * C * np.einsum("kinn->kin", momentum).real
        assert np.abs(velocity - gradient).max() < 1e-6
        bare = dataclasses.replace(patch, spin_orbit=None)
        without = 2 * C * np.einsum("kinn->kin", bare.momentum(k[rows], v)).real
        assert np.abs(without - gradient).max() > 1e-3


def test_kramers_kronig_eps1_at_zero_matches_the_transitions(silicon_all_bands):
    # ε1(0) − 1 = (2/π)∫ ε2/E dE (Kramers–Kronig at E = 0; Yu & Cardona Eq. 6.51): the
    # numerical transform of the broadened ε2 against the sum over transitions
    r = silicon_all_bands
    assert r.eps1[0] == pytest.approx(r.eps1_zero_direct, rel=0.005)


def test_kramers_kronig_of_a_lorentz_oscillator():
    # ε(E) = 1 + A/(E0² − E² − iγE): ε2 and ε1 in closed form (J. D. Jackson, Classical
    # Electrodynamics, 3rd ed. (1999), Eq. 7.51); the transform of ε2 must return ε1
    e = np.arange(0.0, 100.0, 0.01)
    a, e0, gamma = 10.0, 3.0, 0.2
    denom = (e0**2 - e**2) ** 2 + (gamma * e) ** 2
    eps2 = a * gamma * e / denom
    eps1 = 1.0 + a * (e0**2 - e**2) / denom
    got = kramers_kronig(e, eps2)
    window = e < 10.0
    assert np.max(np.abs(got[window] - eps1[window])) < 0.01 * np.max(np.abs(eps1 - 1))


def test_empty_lattice_has_no_interband_absorption():
    # with V = 0 the momentum ħ(k + G) is diagonal in plane waves: no interband matrix
    # element, ε2 = 0 (common practice, no source); the free-electron Drude weight then holds
    # every electron, ω_p² = 4πne²/m0, n_eff = 3 exactly (Ashcroft & Mermin, Solid State
    # Physics (1976), ch. 1, Eq. 1.40, from memory): here from the band curvature m0/m* = 1
    # integrated over the tetrahedron-occupied region, on crossing sorted bands
    m = make_material({"type": "fcc", "a_A": 4.05}, [{"species": "X", "position": [0, 0, 0]}],
                      {"form": "empty"}, electrons={"valence": 3})
    r = optical_spectrum(m, 12, cutoff_eV=40.0, interpolation=None)
    assert np.max(np.abs(r.eps2)) < 1e-10 and r.n_eff_interband < 1e-10
    assert r.n_eff_intraband == pytest.approx(3.0, rel=1e-6)


def test_metal_f_sum_with_the_intraband_weight():
    # f-sum rule for a metal (Yu & Cardona, Fundamentals of Semiconductors, Sec. 6.2): the
    # interband n_eff from the momentum matrix elements plus the intraband (Drude) weight from
    # the band curvature (finite differences of the energies, not the matrix elements) hold the
    # 3 valence electrons of aluminium to 0.5 % (measured 3.0004 at 8³, 3.00015 at 12³)
    r = optical_spectrum(bundled("aluminium"), 8, cutoff_eV=60.0, all_bands=True)
    assert r.n_eff_total == pytest.approx(3.0, rel=0.005)
    assert 0.5 < r.n_eff_intraband < 2.5 and 0.5 < r.n_eff_interband < 2.5


def test_weak_potential_absorption_grows_as_v_squared():
    # second-order perturbation theory: interband matrix elements are first order in V, so
    # the absorption strength is ∝ V² (Yu & Cardona Sec. 6.2; common practice) away from the
    # gaps 2|V_G| (≤ 0.08 eV here), where the anticrossing pairs near the Fermi surface carry
    # weight of order 1/V that the f-sum books with the intraband part: the weight above
    # 0.5 eV is compared, and the total still holds the 3 electrons
    strengths = []
    for scale in (0.05, 0.1):
        m = make_material({"type": "fcc", "a_A": 4.05},
                          [{"species": "Al", "position": [0, 0, 0]}],
                          {"form": "per-species", "unit": "Ry", "shells": [3, 4],
                           "species": {"Al": [0.0179 * scale, 0.0562 * scale]}},
                          electrons={"valence": 3})
        r = optical_spectrum(m, 10, cutoff_eV=40.0, interpolation=None)
        strengths.append(r.n_eff[-1] - np.interp(0.5, r.energies_eV, r.n_eff))
        assert r.n_eff_total == pytest.approx(3.0, rel=0.01)
    assert strengths[1] / strengths[0] == pytest.approx(4.0, rel=0.1)


def test_optics_figure_text_neither_overlaps_nor_leaves_the_figure():
    r = optical_spectrum(bundled("silicon"), 8, cutoff_eV=100.0)
    assert text_problems(optics_figure(r)) == []
    assert set(r.critical_points_eV) == {"E0", "E1", "E2"}


def test_optics_command_writes_its_outputs(tmp_path):
    code, out, err = run(["optics", "silicon", "--mesh", "6", "--exact", "--cutoff-eV", "60",
                          "--out", str(tmp_path)])
    assert code == 0, err
    doc = json.loads((tmp_path / "silicon-optics.json").read_text())
    assert doc["command"] == "optics"
    res = doc["results"]
    assert len(res["eps2"]) == len(res["photon_energies_eV"]) == len(res["eps1"])
    assert "no excitonic" in res["spectrum"]
    assert (tmp_path / "silicon-optics.png").exists() and (tmp_path / "silicon-optics.csv").exists()


def test_the_f_sum_reference_carries_the_kinetic_factor(tmp_path):
    # source: the Thomas–Reiche–Kuhn sum rule with H0 = βħ²|k+G|²/2m0: ∂²H/∂k² = β ħ²/m0, so
    # the f-sum of N electrons is βN (e.g. F. Bassani & G. Pastori Parravicini, Electronic
    # States and Optical Transitions in Solids, 1975, §5; from memory)
    code, out, err = run(["optics", "gallium-arsenide-fitted", "--mesh", "4", "--exact",
                          "--cutoff-eV", "40", "--out", str(tmp_path)])
    assert code == 0, err
    flat = " ".join(out.split())
    # with its spin–orbit term the reference is the effective-mass sum rule, βN plus the
    # occupied states' (m0/ħ²)⟨∂²H_so/∂k²⟩ (bandpert.physics.optics_velocity): 8.6174 here
    flat = " ".join(out.replace("│", " ").split())  # the table's cells joined
    assert "β = 1.077" in flat and "β × 8 = 8.6166 without the spin-orbit terms" in flat
    res = json.loads((tmp_path / "gallium-arsenide-fitted-optics.json").read_text())["results"]
    assert res["sum_rule"] == pytest.approx(1.07708 * 8, rel=2e-4)
    assert res["sum_rule_terms"] == ["spin-orbit"]


@pytest.mark.parametrize("flags, fragment", [(["--broadening-meV", "0"], "--broadening-meV"),
                                             (["--step-meV", "500"], "--step-meV"),
                                             (["--tolerance-meV", "-1"], "--tolerance-meV")])
def test_bad_optics_options_are_one_line_errors(tmp_path, flags, fragment):
    code, _, err = run(["optics", "silicon", "--mesh", "4", "--cutoff-eV", "40", "--out",
                        str(tmp_path / "o"), *flags])
    assert_user_error(code, err, fragment)
    assert not (tmp_path / "o").exists()
