"""Deformation potentials: first-order strain perturbation against finite differences of the
exact bands, and against measured values (issue 14, item 4)."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import MATERIALS
from typer.testing import CliRunner

from bandpert.cli.app import app
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.deformation import (
    deformation_potentials,
    material_deformation_potentials,
    strain_following_document,
)
from bandpert.physics.extrema import locate_edges
from bandpert.physics.internal_strain import internal_displacements, internal_strain_parameter
from bandpert.planewave.model import build_model
from bandpert.planewave.solver import exact_energies, single_blas_thread

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


def test_silicon_d_within_30_percent(silicon):
    # d ≈ −4.8 eV (Laude, Pollak & Cardona, Phys. Rev. B 3, 2623 (1971); from memory). The shear
    # potential needs the internal strain: with the atoms at fixed fractional positions the
    # model gives d = +0.73 eV; with Kleinman's ζ = 0.72 (Cousins et al. 1987, from memory)
    # −4.89 eV.
    dp, _ = silicon
    assert dp.internal_strain_zeta == pytest.approx(0.72)
    assert dp.d_eV == pytest.approx(-4.8, rel=0.3)


def test_zeta_one_keeps_every_bond_length_to_first_order():
    # Kleinman's normalisation (L. Kleinman, Phys. Rev. 128, 2614 (1962)): ζ = 1 is pure bond
    # bending, every nearest-neighbour distance unchanged to first order in the strain; ζ = 0
    # moves no atom; hydrostatic and [100] strains move no atom whatever ζ.
    material = parse_material(read_toml_document(MATERIALS / "silicon.toml"), "si")
    rng = np.random.default_rng(3)
    e = rng.normal(size=(3, 3)) * 1e-3
    eps = 0.5 * (e + e.T)
    u = internal_displacements(material, eps, 1.0)
    frac = np.array([a.position_frac for a in material.atoms])
    bond = (frac[0] - frac[1]) @ material.vectors_A
    bonds = [bond - t @ material.vectors_A for t in ([0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1])]
    assert all(abs(np.linalg.norm(b)) == pytest.approx(material.a_A * np.sqrt(3) / 4)
               for b in bonds)
    # first-order change of |b|: b̂·(ε b + u_1 − u_2); the diagonal of ε stretches the four
    # bonds alike (by tr ε/3), the shear is taken up entirely by the relaxation
    change = [(b / np.linalg.norm(b)) @ (eps @ b + u[0] - u[1]) for b in bonds]
    alike = np.trace(eps) / 3 * material.a_A * np.sqrt(3) / 4
    assert change == pytest.approx([alike] * 4, abs=1e-15)
    shear = eps - np.diag(np.diag(eps))
    u = internal_displacements(material, shear, 1.0)
    assert [(b / np.linalg.norm(b)) @ (shear @ b + u[0] - u[1]) for b in bonds] == pytest.approx(
        [0.0] * 4, abs=1e-15)
    assert not np.any(internal_displacements(material, eps, 0.0))
    assert not np.any(internal_displacements(material, np.eye(3) * 1e-3, 1.0))
    assert not np.any(internal_displacements(material, np.diag([1e-3, 0, 0]), 1.0))


def test_internal_strain_matches_finite_differences_of_displaced_atoms():
    # Hellmann–Feynman (Feynman, Phys. Rev. 56, 340 (1939)): the first-order shear splitting of
    # silicon's Γ25′ triplet with the atoms relaxed (ζ = 0.72) equals a central difference of the
    # exact levels of the sheared crystal with its atoms moved, on one set of plane waves.
    doc = strain_following_document(read_toml_document(MATERIALS / "silicon.toml"), "si",
                                    CUTOFF_EV).document
    material = parse_material(doc, "si")
    zeta = internal_strain_parameter(material)[0]
    splits = []
    sizes = set()
    for e in (-1e-4, 1e-4):
        eps = np.full((3, 3), e) - np.eye(3) * e  # ε_xy = ε_yz = ε_zx = e
        vectors = material.vectors_A @ (np.eye(3) + eps).T
        shift = internal_displacements(material, eps, zeta) @ np.linalg.inv(vectors)
        atoms = [{"species": a.species, "position": (np.asarray(a.position_frac) + s).tolist()}
                 for a, s in zip(material.atoms, shift, strict=True)]
        d = {**doc, "atoms": atoms,
             "lattice": {"type": "vectors", "a_A": material.a_A, "vectors_A": vectors.tolist()}}
        model = build_model(parse_material(d, "si"), CUTOFF_EV)
        sizes.add(model.size)
        w = exact_energies(model, np.zeros((1, 3)), 4)[0][1:4]
        single = w[0] if w[1] - w[0] > w[2] - w[1] else w[2]  # the level split off
        splits.append(single - (w.sum() - single) / 2)
    assert len(sizes) == 1  # the same plane waves at both stencil points
    with single_blas_thread():
        bs = compute_band_structure(material, n_k=40, cutoff_eV=CUTOFF_EV, check_cutoff=False)
        dp = deformation_potentials(material, bs.model, locate_edges(bs), {}, None)
    # strain ε_ij = e (i ≠ j) splits the triplet into 2ne once and −ne twice: 3n per unit e
    assert (splits[1] - splits[0]) / 2e-4 == pytest.approx(3 * dp.valence_lmn_eV[2], rel=1e-3)


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


def test_masses_reads_a_bundled_name_and_reports_the_internal_strain(tmp_path):
    # A bundled name works wherever a material file is read (README); the deformation
    # potentials name the ζ they used (Cousins et al. 1987 for silicon, from memory).
    out = tmp_path / "m.json"
    result = CliRunner().invoke(app, ["masses", "silicon", "--cutoff-eV", "60", "--out",
                                      str(tmp_path), "--json", str(out)])
    assert result.exit_code == 0, result.output
    dp = json.loads(out.read_text())["results"]["deformation_potentials"]
    assert dp["internal_strain_zeta"] == 0.72 and "Cousins" in dp["internal_strain_source"]
