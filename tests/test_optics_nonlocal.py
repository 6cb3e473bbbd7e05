"""The optical spectrum of models with nonlocal wells (and spin–orbit coupling): velocity matrix
elements from ∂H/∂k, the effective-mass sum rule that replaces the electron count, the local
limit of zero-depth wells, the command and its figure."""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest
from conftest import bundled
from figure_cases import text_problems
from test_cli import assert_user_error, run

from bandpert.output.figures.optics import optics_figure
from bandpert.physics.optical_spectrum import optical_spectrum
from bandpert.physics.optics import HBAR2_OVER_M0_EV_A2 as H
from bandpert.physics.optics_velocity import velocities
from bandpert.physics.reduced_basis import build_reduced_basis
from bandpert.planewave.k_polynomial import k_polynomial
from bandpert.planewave.model import centred_model

#: δ of the matrix differences (Å⁻¹): MATRIX_STEP·2π/a for germanium-fitted (a = 5.66 Å).
STEP = 1e-3 * 2 * np.pi / 5.66

#: A general point (Å⁻¹): no level degenerate without spin–orbit coupling.
K0 = np.array([0.21, -0.13, 0.37])


def _without_wells_depth(material):
    """The material with every well depth set to 0 (the wells kept as a k-dependent term)."""
    nl = material.nonlocal_terms
    return dataclasses.replace(material, nonlocal_terms=dataclasses.replace(nl, species={
        s: tuple((ang, 0.0, r) for ang, _, r in ch) for s, ch in nl.species.items()}))


@pytest.fixture(scope="module")
def germanium_spinless():
    return bundled("germanium-fitted").without_spin_orbit()


@pytest.mark.parametrize("interpolate", [False, True])
def test_zero_depth_wells_give_the_local_spectrum(interpolate):
    # with every depth 0 the wells add nothing: the spectrum computed through ∂H/∂k by matrix
    # differences must equal the local model's, whose velocity is β(k + G) exactly, and the
    # sum rule must be the electron count N = 8 (common practice, no source: an exact limit)
    si = bundled("silicon-fitted").without_spin_orbit()
    kw = {"cutoff_eV": 40.0} if interpolate else {"cutoff_eV": 40.0, "interpolation": None}
    zero = optical_spectrum(_without_wells_depth(si), 6, **kw)
    local = optical_spectrum(dataclasses.replace(si, nonlocal_terms=None), 6, **kw)
    assert zero.k_terms == ("nonlocal",) and local.k_terms == ()
    assert np.max(np.abs(zero.eps2 - local.eps2)) < 1e-10 * np.max(local.eps2)
    assert zero.n_eff_interband == pytest.approx(local.n_eff_interband, rel=1e-12)
    assert zero.sum_rule == pytest.approx(8.0, abs=1e-10) and local.sum_rule == 8.0


def test_velocity_is_the_gradient_of_the_bands_with_nonlocal_wells(germanium_spinless):
    # Hellmann–Feynman: ⟨n|∂H/∂k|n⟩ = ∂E_n/∂k for a non-degenerate level (H. Hellmann (1937);
    # R. P. Feynman, Phys. Rev. 56, 340 (1939)). Germanium-fitted's wells are −4 eV deep: the
    # velocity without ∂V_NL/∂k (p/m0 alone) misses the gradient by 0.69 eV·Å at this point;
    # with it, measured 3e-7 eV·Å (the O(δ²) of the matrix differences)
    model = centred_model(germanium_spinless, 40.0, K0, spin_orbit=True)
    full = k_polynomial(model)
    reduced = build_reduced_basis(germanium_spinless, 40.0, 8).patches[0]
    for poly in (full, reduced):  # the plane waves and a reduced basis of them
        e, v = poly.eigensystem(K0[None], 12)
        assert np.min(np.diff(e[0])) > 1e-3
        momentum, _ = velocities(poly, K0[None], v, STEP)
        h = 1e-5
        gradient = np.stack([(poly.eigenvalues(K0[None] + h * np.eye(3)[a], 12)
                              - poly.eigenvalues(K0[None] - h * np.eye(3)[a], 12)) / (2 * h)
                             for a in range(3)], axis=1)[0]
        velocity = H * np.einsum("inn->in", momentum[0]).real
        assert np.abs(velocity - gradient).max() < 2e-6
        bare = dataclasses.replace(poly, nonlocal_wells=None).momentum(K0[None], v)
        assert np.abs(H * np.einsum("inn->in", bare[0]).real - gradient).max() > 0.1


@pytest.mark.parametrize("spin_orbit", [False, True])
def test_effective_mass_sum_rule_is_exact_in_a_finite_basis(spin_orbit, germanium_spinless):
    # second-order k·p perturbation theory (Yu & Cardona, Fundamentals of Semiconductors,
    # Sec. 2.6, from memory), summed over the occupied states of a finite basis, every band
    # kept: Σ_{v,c} 2(m0/ħ²)|⟨c|∂H/∂k_a|v⟩|²/E_cv + (m0/ħ²)∂²(Σ_v E_v)/∂k_a²
    # = Σ_v (m0/ħ²)⟨v|∂²H/∂k_a²|v⟩ exactly (direction-averaged here). The curvature of the
    # occupied energies by Richardson-extrapolated differences of the eigenvalues (O(h⁴)).
    # The residual is the O(δ²) truncation of the velocity's differences: on germanium-fitted
    # (energy-dependent well, 40 eV) 3.8e-7, 1.5e-6 and 1.0e-7 of 11.3 at δ, 2δ and δ/2, and
    # 3.3e-7 at δ with its slope removed; the constant-well file before it left 5e-8
    material = bundled("germanium-fitted") if spin_orbit else germanium_spinless
    n_occ = 8 if spin_orbit else 4
    poly = k_polynomial(centred_model(material, 40.0, K0, spin_orbit=True))
    e, v = poly.eigensystem(K0[None], poly.size)

    def laplacian(h):
        trace = [poly.eigenvalues(K0[None] + x, n_occ)[0].sum()
                 for x in np.concatenate([h * np.eye(3), -h * np.eye(3), np.zeros((1, 3))])]
        return (sum(trace[:6]) - 6 * trace[6]) / h**2

    bands = (4 * laplacian(1e-3) - laplacian(2e-3)) / 3 / (3 * H)

    def residual(step):
        momentum, curvature = velocities(poly, K0[None], v, step)
        gaps = e[0, n_occ:, None] - e[0, None, :n_occ]
        interband = np.sum(2 * H * np.abs(momentum[0][:, n_occ:, :n_occ]) ** 2 / gaps) / 3
        return interband + bands - curvature[0, :n_occ].sum(), curvature[0, :n_occ].sum()

    (coarse, rule), (fine, _) = residual(STEP), residual(STEP / 2)
    assert abs(coarse) < 1e-6 and abs(fine) < 2.5e-7
    assert abs(fine) < abs(coarse) / 3 or abs(coarse) < 5e-8   # shrinks like δ²: exact as δ → 0
    assert abs(rule - n_occ) > 0.02  # the wells' ⟨∂²V/∂k²⟩ is not negligible here


def test_mesh_f_sum_tends_to_the_sum_rule_not_the_electron_count():
    # the zone average of a band's ∂²E/∂k² vanishes (a periodic function), so with every band
    # the f-sum tends to the occupied states' zone average of (m0/ħ²)⟨∂²H/∂k²⟩ as the mesh
    # grows (Yu & Cardona Sec. 6.2 for the local f-sum, from memory; its generalisation in
    # bandpert.physics.optics_velocity). Silicon-fitted without spin–orbit, 60 eV, every band:
    # sum rule 7.9379, 7.9448, 7.9450 at 4³, 8³, 12³; n_eff 9.81, 8.054, 7.9472: at 12³ within
    # 0.03 % of the sum rule and 0.66 % from the electron count 8
    material = bundled("silicon-fitted").without_spin_orbit()
    r = optical_spectrum(material, 12, cutoff_eV=60.0, all_bands=True)
    assert r.n_eff_total == pytest.approx(r.sum_rule, rel=1e-3)
    assert abs(r.n_eff_total - 8.0) > 0.005 * 8.0
    assert r.sum_rule == pytest.approx(7.945, abs=2e-3)


def test_optics_command_on_a_nonlocal_file(tmp_path):
    code, out, err = run(["optics", "silicon-fitted", "--mesh", "4", "--exact", "--cutoff-eV",
                          "40", "--out", str(tmp_path)])
    assert code == 0, err
    flat = " ".join(out.replace("│", " ").split())  # the table's cells joined
    assert "with spin-orbit and nonlocal terms" in flat and "effective-mass sum rule" in flat
    res = json.loads((tmp_path / "silicon-fitted-optics.json").read_text())["results"]
    assert res["sum_rule_terms"] == ["spin-orbit", "nonlocal"]
    assert 7.0 < res["sum_rule"] < 9.0 and res["sum_rule"] != 8.0


@pytest.mark.parametrize("name", ["silicon-fitted", "germanium-fitted", "silicon"])
def test_optics_figure_text_neither_overlaps_nor_leaves_the_figure(name):
    # germanium-fitted's long name, centred on the axes, ran past the figure's left edge; on
    # silicon at this mesh E0 3.26 and E2 4.08 were drawn on one row (a mark's row counted its
    # near neighbours instead of finding a free row)
    r = optical_spectrum(bundled(name), 4, cutoff_eV=40.0, interpolation=None)
    fig = optics_figure(r)
    assert text_problems(fig) == []
    assert ("sum rule" in fig._supxlabel.get_text()) == (name != "silicon")


def test_bad_input_on_a_nonlocal_file_is_one_line(tmp_path):
    code, _, err = run(["optics", "silicon-fitted", "--mesh", "4", "--cutoff-eV", "40",
                        "--broadening-meV", "-5", "--out", str(tmp_path / "o")])
    assert_user_error(code, err, "--broadening-meV")
    assert not (tmp_path / "o").exists()


def test_silicon_fitted_spectrum_against_measured_values():
    # a documented comparison, not a fit target. Measured (room temperature): ε2 peaks E1 ≈ 3.4
    # and E2 ≈ 4.25 eV, ε1(0) ≈ 11.7 (source: D. E. Aspnes & A. A. Studna, Phys. Rev. B 27, 985
    # (1983), from memory; ε1(0) handbook value, e.g. Madelung, Semiconductors: Data Handbook
    # (2004), from memory). The one-electron spectrum (no excitonic or local-field effects)
    # of silicon-fitted, spinless (its Δso = 0.044 eV moves the valence top by Δso/3), 12³,
    # at its own cutoff: peaks 3.50 and 4.40 eV (3.61, 4.43 at 20³; 3.61, 4.47 with
    # spin–orbit at the default 24³), 0.1–0.2 eV above the measured ones, within 0.3 eV
    # asserted; ε1(0) 10.50 (10.46 at 20³), 10.6 % below 11.7: the model does not give the
    # measured value, so the test holds it to its documented shortfall (within 15 %)
    material = bundled("silicon-fitted").without_spin_orbit()
    r = optical_spectrum(material, 12, n_bands=12, interpolation=None)
    assert np.min(np.abs(r.peaks_eV - 3.4)) < 0.3 and np.min(np.abs(r.peaks_eV - 4.25)) < 0.3
    assert 0.85 * 11.7 < r.eps1[0] < 11.7
    assert r.eps1[0] == pytest.approx(r.eps1_zero_direct, rel=0.005)  # Kramers–Kronig
