"""Strain in the k·p models (Bir–Pikus): tensors, band edges at Γ, conventions, bad input."""

from __future__ import annotations

import copy
import math
import tomllib

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bandpert.data import MATERIALS_DIR
from bandpert.errors import InputError
from bandpert.input.kp_file import load_kp_material, parse_kp_material
from bandpert.kp import (
    bir_pikus_cartesian,
    cartesian_basis_matrix,
    hydrostatic_strain,
    masses_at_gamma,
    material_model,
    piezoelectric_note,
    pseudomorphic_strain,
)

GAAS = load_kp_material("gallium-arsenide")
GAAS_DOC = tomllib.loads((MATERIALS_DIR / "kp" / "gallium-arsenide.toml").read_text("utf-8"))


def _chuang_001(dp, delta, e_par, e_zz):
    """Band edges at Γ under [001] biaxial strain, from the unstrained valence top.

    source: S. L. Chuang, Physics of Optoelectronic Devices (Wiley 1995), ch. 4 (the strained
    band edges at k = 0; from memory), in the form quoted by the issue: HH at −P_ε − Q_ε, LH/SO
    at −P_ε + ½[Q_ε − Δ ± √(Δ² + 2ΔQ_ε + 9Q_ε²)], conduction at Eg + a_c tr ε.
    """
    tr = 2 * e_par + e_zz
    p_e = -dp.a_v_eV * tr
    q_e = -dp.b_eV / 2 * (2 * e_par - 2 * e_zz)
    root = math.sqrt(delta**2 + 2 * delta * q_e + 9 * q_e**2)
    hh = -p_e - q_e
    lh = -p_e + 0.5 * (q_e - delta + root)
    so = -p_e + 0.5 * (q_e - delta - root)
    return hh, lh, so, dp.a_c_eV * tr


@pytest.mark.parametrize("e_par", [-0.012, -0.003, 0.004, 0.015])
@pytest.mark.parametrize("name", ["six-band", "eight-band"])
def test_001_biaxial_band_edges_match_the_closed_forms(name, e_par):
    el = GAAS.elastic
    eps = pseudomorphic_strain(GAAS.a_A, GAAS.a_A * (1 + e_par), el, "001")
    # source: Chuang 1995, ch. 4: ε_zz = −2 (c12/c11) ε∥ for [001] growth (from memory)
    e_zz = -2 * el.c12_GPa / el.c11_GPa * e_par
    np.testing.assert_allclose(eps, np.diag([e_par, e_par, e_zz]), rtol=0, atol=1e-15)
    hh, lh, so, dc = _chuang_001(GAAS.deformation, GAAS.parameters.Delta_so_eV, e_par, e_zz)
    model = material_model(GAAS, name, strain=eps)
    e = model.gamma_energies_eV
    want = sorted([so, so, lh, lh, hh, hh] + ([GAAS.parameters.Eg_eV + dc] * 2
                                              if name == "eight-band" else []))
    np.testing.assert_allclose(e, want, rtol=0, atol=1e-9)
    top = "heavy hole" if e_par < 0 else "light hole"  # compression: HH on top
    assert model.band_names[5] == top


def test_111_growth_strain_and_four_band_splitting():
    el = GAAS.elastic
    e_par = -0.01
    eps = pseudomorphic_strain(GAAS.a_A, GAAS.a_A * (1 + e_par), el, "111")
    c11, c12, c44 = el.c11_GPa, el.c12_GPa, el.c44_GPa
    # source: the issue's [111] relations (Chuang 1995, ch. 4; from memory):
    # ε⊥ = −2(c11 + 2c12 − 2c44)/(c11 + 2c12 + 4c44) ε∥, ε_xy = (ε⊥ − ε∥)/3
    e_perp = -2 * (c11 + 2 * c12 - 2 * c44) / (c11 + 2 * c12 + 4 * c44) * e_par
    e_xy = (e_perp - e_par) / 3
    n = np.ones(3) / math.sqrt(3)
    assert n @ eps @ n == pytest.approx(e_perp, rel=1e-12)
    np.testing.assert_allclose(eps[0, 1], e_xy, rtol=1e-12)
    np.testing.assert_allclose(np.diag(eps), (2 * e_par + e_perp) / 3, rtol=1e-12)
    # four-band limit: the Γ8 block of the Bir–Pikus matrix alone
    u = cartesian_basis_matrix("six-band")
    block = (u.conj().T @ bir_pikus_cartesian(eps, GAAS.deformation, False) @ u)[:4, :4]
    levels = np.linalg.eigvalsh(block)
    split = levels[-1] - levels[0]
    # source: issue 19 / Chuang 1995 ch. 4: HH–LH splitting 2√3 |d ε_xy| for [111] growth
    assert split == pytest.approx(2 * math.sqrt(3) * abs(GAAS.deformation.d_eV * e_xy),
                                  abs=1e-12)
    assert "piezoelectric" in piezoelectric_note(eps)
    assert piezoelectric_note(np.diag([e_par, e_par, 0.0])) == ""


def test_110_growth_leaves_no_traction_on_the_growth_plane():
    from bandpert.kp.strain import stiffness_tensor

    eps = pseudomorphic_strain(GAAS.a_A, GAAS.a_A * 0.99, GAAS.elastic, "110")
    n = np.array([1.0, 1.0, 0.0]) / math.sqrt(2)
    sigma = np.einsum("ijkl,kl->ij", stiffness_tensor(GAAS.elastic), eps)
    np.testing.assert_allclose(sigma @ n, 0.0, atol=1e-9)  # common practice, no source
    t1, t2 = np.array([1.0, -1.0, 0.0]) / math.sqrt(2), np.array([0.0, 0.0, 1.0])
    for t in (t1, t2):
        assert t @ eps @ t == pytest.approx(-0.01, rel=1e-12)


def test_gaas_gap_deformation_potential_and_the_gap_opens_under_compression():
    # source: Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), GaAs table:
    # a = a_c − a_v = −8.33 eV (from memory)
    assert GAAS.deformation.gap_eV == pytest.approx(-8.33, abs=1e-12)
    e = -0.002
    model = material_model(GAAS, "eight-band", strain=hydrostatic_strain(e))
    energies = model.gamma_energies_eV
    gap = energies[6] - energies[5]
    assert gap - GAAS.parameters.Eg_eV == pytest.approx(-8.33 * 3 * e, abs=1e-12)
    assert gap > GAAS.parameters.Eg_eV
    # the same file written in the opposite a_v convention gives the same bands
    flipped = copy.deepcopy(GAAS_DOC)
    flipped["deformation"]["a_v_convention"] = "a = a_c + a_v"
    flipped["deformation"]["a_v_eV"] = -flipped["deformation"]["a_v_eV"]
    other = parse_kp_material(flipped, "flipped.toml")
    assert other.deformation == GAAS.deformation
    np.testing.assert_allclose(
        material_model(other, "eight-band", strain=hydrostatic_strain(e)).gamma_energies_eV,
        energies, atol=0)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.floats(-0.02, 0.02), min_size=6, max_size=6),
       st.lists(st.floats(-0.1, 0.1), min_size=3, max_size=3))
def test_strained_bands_stay_kramers_pairs_and_hermitian(comps, k):
    xx, yy, zz, yz, xz, xy = comps
    eps = np.array([[xx, xy, xz], [xy, yy, yz], [xz, yz, zz]])
    model = material_model(GAAS, "eight-band", strain=eps)
    h = model.hamiltonian_eV(k)[0]
    np.testing.assert_allclose(h, h.conj().T, atol=1e-12)
    e = np.linalg.eigvalsh(h)
    # common practice, no source: with inversion-asymmetry terms left out, strain keeps
    # inversion and time reversal, so every level is a Kramers pair
    np.testing.assert_allclose(e[0::2], e[1::2], atol=1e-9)


def test_strained_masses_split_heavy_and_light_holes_along_001():
    eps = pseudomorphic_strain(GAAS.a_A, GAAS.a_A * 0.99, GAAS.elastic, "001")
    masses = masses_at_gamma(material_model(GAAS, "six-band", strain=eps), "001")
    # along [001] the heavy hole stays m0/(γ1 − 2γ2) under [001] strain (the strain only
    # shifts the edges; common practice, no source)
    g1, g2 = GAAS.parameters.gamma1, GAAS.parameters.gamma2
    assert masses.of("heavy hole") == pytest.approx(1 / (g1 - 2 * g2), rel=1e-9)


def test_strain_needs_deformation_potentials_and_a_six_or_eight_band_model():
    doc = copy.deepcopy(GAAS_DOC)
    del doc["deformation"]
    bare = parse_kp_material(doc, "bare.toml")
    with pytest.raises(InputError) as info:
        material_model(bare, "eight-band", strain=hydrostatic_strain(0.001))
    assert info.value.key == "deformation" and info.value.source == "bare.toml"
    with pytest.raises(InputError, match="six- or eight-band"):
        material_model(GAAS, "two-band", strain=hydrostatic_strain(0.001))
    with pytest.raises(InputError, match="exceeds"):
        material_model(GAAS, "six-band", strain=0.2 * np.eye(3))


@pytest.mark.parametrize("table,key,value,words", [
    ("deformation", "a_v_convention", "a_v positive", "is not one of"),
    ("deformation", "b_eV", 80.0, "outside the accepted range"),
    ("deformation", "d_eV", "x", "expected a number"),
    ("elastic", "c12_GPa", 1300.0, "expected c11 > c12"),
    ("elastic", "c44_GPa", -5.0, "must be positive"),
    ("alignment", "valence_band_eV", 50.0, "outside the accepted range"),
    ("deformation", "extra", 1.0, "unknown key"),
])
def test_bad_strain_keys_are_one_line_errors(table, key, value, words):
    doc = copy.deepcopy(GAAS_DOC)
    doc[table][key] = value
    with pytest.raises(InputError) as info:
        parse_kp_material(doc, "bad.toml")
    text = str(info.value)
    assert text.startswith(f"bad.toml: {table}.{key}: ") and words in text and "\n" not in text


# --- the command line ---------------------------------------------------------------------------

def _cli(args: list[str]) -> tuple[int, str, str]:
    import contextlib
    import io

    import bandpert.cli.app as cli

    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        with pytest.raises(SystemExit) as stop:
            cli.main(args)
    return stop.value.code or 0, stdout.getvalue(), stderr.getvalue()


def test_kp_command_on_a_substrate_writes_the_strained_edges(tmp_path):
    import json

    code, out, err = _cli(["kp", "gallium-arsenide", "--on", "indium-phosphide", "--growth",
                           "111", "--model", "six-band", "--out", str(tmp_path)])
    assert code == 0, err
    assert "piezoelectric" in err and "E_hh − E_lh" in out
    doc = json.loads((tmp_path / "gallium-arsenide-kp.json").read_text("utf-8"))
    strain = doc["results"]["strain"]
    assert strain["kind"] == "pseudomorphic" and strain["axis"] == "111"
    assert strain["substrate_a_A"] == pytest.approx(load_kp_material("indium-phosphide").a_A)
    edges = doc["results"]["models"]["six-band"]["strain_edges"]
    e = np.array(strain["tensor"])
    # InP is larger: tension in the plane. The strain matrix's trace over the six valence
    # states is 6 a_v tr ε (P_ε = −a_v tr ε, the shears traceless), so the mean shift of the
    # three Kramers pairs is a_v tr ε exactly (common practice, no source)
    mean = np.mean([edges["shifts_eV"][b] for b in ("heavy hole", "light hole", "split-off")])
    assert np.trace(e) > 0
    assert mean == pytest.approx(GAAS.deformation.a_v_eV * np.trace(e), abs=1e-12)
    assert edges["hh_lh_splitting_eV"] == pytest.approx(
        edges["edges_eV"]["heavy hole"] - edges["edges_eV"]["light hole"], abs=0)


@pytest.mark.parametrize("args,words", [
    (["--strain", "1,2"], "--strain: '1,2' is not six comma-separated numbers"),
    (["--hydro", "0.01", "--on", "5.6"], "--on: hydrostatic and substrate_a_A both"),
    (["--on", "5.6", "--growth", "112"], "--growth: '112' is not one of"),
    (["--hydro", "0.5"], "--hydro: strain component 0.5 exceeds"),
    (["--on", "-3"], "--on: expected a positive lattice constant"),
])
def test_kp_command_refuses_bad_strain_in_one_line(args, words, tmp_path):
    code, out, err = _cli(["kp", "gallium-arsenide", "--out", str(tmp_path), *args])
    assert code == 2 and len(err.splitlines()) == 1 and words in err, err
    assert not any(tmp_path.iterdir())


def test_kp_command_refuses_strain_without_deformation_potentials(tmp_path):
    doc = (MATERIALS_DIR / "kp" / "gallium-arsenide.toml").read_text("utf-8")
    path = tmp_path / "bare.toml"
    path.write_text(doc[:doc.index("[deformation]")], "utf-8")
    code, _, err = _cli(["kp", str(path), "--hydro", "-0.01", "--out", str(tmp_path / "o")])
    assert code == 2 and f"{path}: deformation: missing" in err, err
    assert not (tmp_path / "o").exists()
