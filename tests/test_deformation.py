"""Deformation potentials: first-order strain perturbation against finite differences of the
exact bands, and against measured values (issue 14, item 4)."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import MATERIALS

from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.deformation import (
    deformation_potentials,
    material_deformation_potentials,
    strain_following_document,
)
from bandpert.physics.extrema import locate_edges
from bandpert.planewave.solver import single_blas_thread

CUTOFF_EV = 100.0


def _dp(name):
    doc = read_toml_document(MATERIALS / f"{name}.toml")
    material = parse_material(doc, name)
    with single_blas_thread():
        bs = compute_band_structure(material, n_k=40, cutoff_eV=CUTOFF_EV, check_cutoff=False)
        edges = locate_edges(bs)
    return material_deformation_potentials(material, doc, bs, edges)


@pytest.fixture(scope="module")
def silicon():
    return _dp("silicon")


@pytest.fixture(scope="module")
def gaas():
    return _dp("gallium-arsenide")


def test_first_order_strain_matches_finite_differences_of_the_exact_gap():
    # Hellmann–Feynman: dE/dε = <ψ|∂H/∂ε|ψ> is the exact first derivative of the finite-basis
    # level (Feynman, Phys. Rev. 56, 340 (1939)); checked against a central difference of the
    # Γ gap of the strained crystal on the same plane waves (the cutoff scales with the cell).
    doc = strain_following_document(read_toml_document(MATERIALS / "silicon.toml"), "si",
                                    CUTOFF_EV).document
    material = parse_material(doc, "si")
    h = 1e-4
    gaps = []
    for s in (-h, h):
        d = {**doc, "lattice": {"type": "vectors", "a_A": material.a_A,
                                "vectors_A": (material.vectors_A * (1 + s)).tolist()}}
        m = parse_material(d, "si")
        bs = compute_band_structure(m, n_k=8, cutoff_eV=CUTOFF_EV / (1 + s) ** 2,
                                    check_cutoff=False)
        i = list(bs.path.labels).index("Γ") if "Γ" in bs.path.labels else 0
        e = bs.energies_eV[bs.path.label_indices[i]]
        gaps.append(e[4] - e[3])
    fd = (gaps[1] - gaps[0]) / (3 * 2 * h)  # d ln V = 3 ds
    with single_blas_thread():
        bs = compute_band_structure(material, n_k=40, cutoff_eV=CUTOFF_EV, check_cutoff=False)
        dp = deformation_potentials(material, bs.model, locate_edges(bs),
                                    {"Γ": np.zeros(3)}, None)
    assert dp.gap_hydrostatic_eV["Γ"] == pytest.approx(fd, rel=1e-4, abs=1e-4)


def test_silicon_shear_potentials_within_30_percent(silicon):
    # Ξ_u = 8.6 ± 0.4 eV (Δ valleys) and b ≈ −2.1 eV (Laude, Pollak & Cardona, Phys. Rev. B 3,
    # 2623 (1971); from memory). Measured here: Ξ_u ≈ +10.1 eV, b ≈ −1.7 eV.
    dp, _ = silicon
    assert dp.xi_u_eV == pytest.approx(8.6, rel=0.3)
    assert dp.b_eV == pytest.approx(-2.1, rel=0.3)


@pytest.mark.xfail(strict=True, reason="model class: the local 1966 form factors with the "
                   "4-parameter v(q) give d = +0.7 eV (atoms at fixed fractional positions, no "
                   "internal relaxation); measured −4.8 eV")
def test_silicon_d_within_30_percent(silicon):
    # d ≈ −4.8 eV (Laude, Pollak & Cardona, Phys. Rev. B 3, 2623 (1971); from memory).
    dp, _ = silicon
    assert dp.d_eV == pytest.approx(-4.8, rel=0.3)


@pytest.mark.xfail(strict=True, reason="model class: no v(q) of the Friedel–Hybertsen–Schlüter "
                   "form reproduces both the tabulated form factors and the measured slope; the "
                   "model gives dEg/d ln V = −1.07 eV against +1.38 eV")
def test_silicon_indirect_gap_rises_with_volume(silicon):
    # dEg/dP = −1.41 meV/kbar with B = 0.98 Mbar: dEg/d ln V ≈ +1.38 eV (Welber, Kim, Cardona &
    # Rodriguez, Solid State Commun. 17, 1021 (1975); from memory).
    dp, _ = silicon
    assert dp.gap_hydrostatic_eV["indirect"] == pytest.approx(1.38, rel=0.3)


@pytest.mark.xfail(strict=True, reason="model class: the model gives a = −11.4 eV for the "
                   "GaAs Γ gap, 37 % beyond the measured −8.33 eV")
def test_gaas_gamma_gap_deformation_potential(gaas):
    # a = −8.33 eV (Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001); from memory).
    dp, _ = gaas
    assert dp.gap_hydrostatic_eV["Γ"] == pytest.approx(-8.33, rel=0.3)


def test_signs_that_the_model_gets_right(silicon, gaas):
    # The Γ gaps close under expansion (a < 0 for every direct gap at Γ of the group-IV and
    # III–V semiconductors; Vurgaftman et al. 2001, Table; from memory), the Δ valleys of
    # silicon rise under tension along their axis (Ξ_u > 0) and b < 0 (Laude et al. 1971).
    dp_si, note_si = silicon
    dp_gaas, note_gaas = gaas
    assert dp_si.gap_hydrostatic_eV["Γ"] < 0 and dp_gaas.gap_hydrostatic_eV["Γ"] < 0
    assert dp_si.xi_u_eV > 0 and dp_si.b_eV < 0
    assert dp_gaas.xi_u_eV is None  # a Γ valley has no uniaxial Ξ_u
    # every output says how v(q) follows the strain, and that the measured slope is missed
    assert "cannot be met" in note_si and "Welber" in note_si
    assert "Vurgaftman" in note_gaas
