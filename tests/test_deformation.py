"""Deformation potentials: first-order strain perturbation against finite differences of the
exact bands, and against measured values (issue 14, item 4)."""

from __future__ import annotations

import contextlib
import io
import json

import numpy as np
import pytest
from conftest import MATERIALS
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

import bandpert.cli.app as cli
from bandpert.cli.app import app
from bandpert.errors import InputError
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.deformation import deformation_potentials
from bandpert.physics.deformation_fit import (
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
    # 2623 (1971); from memory). Targets of the slope fit (silicon.toml); measured here with the
    # fitted slopes: Ξ_u = +8.60 eV, b = −2.16 eV (the form's own slopes gave +10.16, −1.71).
    dp, _ = silicon
    assert dp.xi_u_eV == pytest.approx(8.6, rel=0.3)
    assert dp.b_eV == pytest.approx(-2.1, rel=0.3)


def test_silicon_d_within_30_percent(silicon):
    # d ≈ −4.8 eV (Laude, Pollak & Cardona, Phys. Rev. B 3, 2623 (1971); from memory). The shear
    # potential needs the internal strain: with the atoms at fixed fractional positions the
    # model gives d near +0.7 eV; with Kleinman's ζ = 0.72 (Cousins et al. 1987, from memory)
    # −4.72 eV with the fitted slopes.
    dp, _ = silicon
    assert dp.internal_strain_zeta == pytest.approx(0.72)
    assert dp.d_eV == pytest.approx(-4.8, rel=0.3)


def test_silicon_indirect_gap_rises_with_volume(silicon):
    # dEg/dP = −1.41 meV/kbar with B = 0.98 Mbar: dEg/d ln V ≈ +1.38 eV (Welber, Kim, Cardona &
    # Rodriguez, Solid State Commun. 17, 1021 (1975); from memory). The functional form's own
    # slopes gave −0.89 eV (wrong sign); with the fitted slopes +1.37 eV.
    dp, _ = silicon
    assert dp.gap_hydrostatic_eV["indirect"] > 0
    assert dp.gap_hydrostatic_eV["indirect"] == pytest.approx(1.38, rel=0.3)
    assert dp.xi_d_plus_xi_u_over_3_minus_a_v_eV == dp.gap_hydrostatic_eV["indirect"]


def test_gaas_gamma_gap_and_b_within_30_percent(gaas):
    # a = a_c − a_v = −8.33 eV and b = −2.0 eV (Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89,
    # 5815 (2001); from memory). The form's own slopes gave a = −11.4 eV, b = −0.72 eV.
    dp, _ = gaas
    assert dp.gap_hydrostatic_eV["Γ"] == pytest.approx(-8.33, rel=0.3)
    assert dp.b_eV == pytest.approx(-2.0, rel=0.3)


def test_signs_that_the_model_gets_right(silicon, gaas):
    # The Γ gaps close under expansion (a < 0 for every direct gap at Γ of the group-IV and
    # III–V semiconductors; Vurgaftman et al. 2001, Table; from memory), the Δ valleys of
    # silicon rise under tension along their axis (Ξ_u > 0) and b < 0 (Laude et al. 1971).
    dp_si, note_si = silicon
    dp_gaas, note_gaas = gaas
    assert dp_si.gap_hydrostatic_eV["Γ"] < 0 and dp_gaas.gap_hydrostatic_eV["Γ"] < 0
    assert dp_si.xi_u_eV > 0 and dp_si.b_eV < 0
    assert dp_gaas.xi_u_eV is None  # a Γ valley has no uniaxial Ξ_u
    # every output says how v(q) follows the strain, against which measurements, from where
    assert "regularised least squares" in note_si and "Welber" in note_si
    assert "Laude" in note_si and "was -0.89" in note_si
    assert "Vurgaftman" in note_gaas


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


def test_masses_reads_a_bundled_name_and_reports_the_internal_strain(tmp_path):
    # A bundled name works wherever a material file is read (README); the deformation
    # potentials name the ζ they used (Cousins et al. 1987 for silicon, from memory).
    out = tmp_path / "m.json"
    result = CliRunner().invoke(app, ["masses", "silicon", "--cutoff-eV", "60", "--out",
                                      str(tmp_path), "--json", str(out)])
    assert result.exit_code == 0, result.output
    dp = json.loads(out.read_text())["results"]["deformation_potentials"]
    assert dp["internal_strain_zeta"] == 0.72 and "Cousins" in dp["internal_strain_source"]
    # the indirect gap opens under expansion in the masses output too (Welber et al. 1975,
    # dEg/dP = −1.41 meV/kbar with B = 0.98 Mbar: +1.38 eV per ln V; from memory)
    assert dp["gap_hydrostatic_eV"]["indirect"] == pytest.approx(1.38, rel=0.3)
    assert "Welber" in dp["form_factors"]


def test_sweep_shows_the_silicon_gap_opening_under_expansion(tmp_path):
    # The user's command of issue 14 (engine and k-points reduced for speed): measured, the
    # indirect gap of silicon rises with volume, dEg/d ln V ≈ +1.38 eV (Welber, Kim, Cardona &
    # Rodriguez 1975 with B = 0.98 Mbar; from memory); d ln V = 3ε for strain.hydrostatic = ε.
    # Every output states the faithful window of the continuous form.
    out = tmp_path / "s.json"
    result = CliRunner().invoke(app, ["sweep", "silicon", "--vary",
                                      "strain.hydrostatic=-0.005:0.005:3", "--form-factors",
                                      "continuous", "--quantity", "edges", "--engine", "serial",
                                      "--k-points", "16", "--cutoff-eV", "100", "--out",
                                      str(tmp_path), "--json", str(out)])
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())["results"]
    gap = doc["columns"]["gap_eV"]
    assert gap[0] < gap[1] < gap[2]
    assert (gap[2] - gap[0]) / (3 * 0.01) == pytest.approx(1.38, rel=0.3)
    assert "equals the tabulated model exactly for a/a_ref in" in doc["form_factors"]
    assert doc["text"]["faithful_window"] == ["yes"] * 3


def test_slope_fit_keeps_the_tabulated_potential_and_is_linear():
    # The slope corrections vanish at every lattice shell (bandpert.planewave.slope_form), so
    # V(G) at the reference lattice is the tabulated one of Cohen & Bergstresser, Phys. Rev.
    # 141, 789 (1966); the fit itself checks that the recomputed deformation potentials equal
    # the linear prediction to 1e-6 eV (it raises otherwise).
    for name in ("silicon", "gallium-arsenide"):
        sf = strain_following_document(read_toml_document(MATERIALS / f"{name}.toml"), name,
                                       CUTOFF_EV)
        assert sf.max_delta_v_eV < 1e-12
        assert all(abs(d) < 3.0 for d in sf.slope_changes_eV_A.values())  # eV·Å
        for t in sf.targets:  # every target met within its uncertainty
            assert abs(sf.achieved_eV[t.name] - t.value_eV) < t.uncertainty_eV


def test_germanium_gaps_follow_their_pressure_coefficients():
    # dEg/dP ≈ +5.0 meV/kbar (L gap; Paul & Warschauer 1958) and ≈ +13 meV/kbar (Γ gap; Welber,
    # Cardona, Tsay & Bendow 1977) with B = 0.75 Mbar: −3.75 and −9.75 eV per ln V (all from
    # memory, approximate). The form's own slopes gave −6.73 and −13.87 eV.
    sf = strain_following_document(read_toml_document(MATERIALS / "germanium.toml"), "ge",
                                   CUTOFF_EV)
    assert sf.before_eV["indirect_gap"] < -5.0
    assert sf.achieved_eV["indirect_gap"] == pytest.approx(-3.75, rel=0.3)
    assert sf.achieved_eV["gamma_gap"] == pytest.approx(-9.75, rel=0.3)
    # not a target, so an independent check of the fitted slopes: b = −2.86 ± 0.15 eV
    # (Chandrasekhar & Pollak, Phys. Rev. B 15, 2127 (1977); from memory); −1.44 eV with the
    # form's own slopes (50 % off), −2.20 eV with the fitted ones
    dp, note = _dp("germanium")
    assert dp.conduction_valley.startswith("L") and "Paul & Warschauer" in note
    assert dp.b_eV == pytest.approx(-2.86, rel=0.3)


TARGETS = """
[potential.deformation_targets]
gamma_gap = { value_eV = -8.33, source = "Vurgaftman, Meyer & Ram-Mohan 2001" }
"""

BAD_TARGETS = [
    ("unknown-name", 'gamma_gap = {', 'e_gap = {', "potential.deformation_targets.e_gap"),
    ("no-source", ', source = "Vurgaftman, Meyer & Ram-Mohan 2001"', "",
     "potential.deformation_targets.gamma_gap.source"),
    ("empty-source", '"Vurgaftman, Meyer & Ram-Mohan 2001"', '" "',
     "potential.deformation_targets.gamma_gap.source"),
    ("value-out-of-range", "-8.33", "-833", "potential.deformation_targets.gamma_gap.value_eV"),
    ("value-a-string", "-8.33", '"-8.33"', "potential.deformation_targets.gamma_gap.value_eV"),
    ("uncertainty-zero", "value_eV = -8.33", "value_eV = -8.33, uncertainty_eV = 0",
     "potential.deformation_targets.gamma_gap.uncertainty_eV"),
    ("unknown-field", "value_eV = -8.33", "value_eV = -8.33, error = 1",
     "potential.deformation_targets.gamma_gap.error"),
    ("not-a-table", 'gamma_gap = { value_eV = -8.33, source = "Vurgaftman, Meyer & Ram-Mohan '
     '2001" }', "gamma_gap = -8.33", "potential.deformation_targets.gamma_gap"),
]


def _run(args: list[str]) -> tuple[int, str]:
    """``bandpert ARGS`` in-process through the entry point: (exit status, stderr)."""
    err = io.StringIO()
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):
        with pytest.raises(SystemExit) as stop:
            cli.main(args)
    return (stop.value.code or 0), err.getvalue()


def _gaas_with(targets: str) -> str:
    text = (MATERIALS / "gallium-arsenide.toml").read_text(encoding="utf-8")
    head, rest = text.split("[potential.deformation_targets]")
    return head + targets.strip() + "\n\n[electrons]" + rest.split("[electrons]")[1]


@pytest.mark.parametrize(("old", "new", "key"), [b[1:] for b in BAD_TARGETS],
                         ids=[b[0] for b in BAD_TARGETS])
def test_malformed_deformation_targets_are_refused(old, new, key, tmp_path):
    # One line naming file and key, exit 2, nothing written (README, bad input).
    path = tmp_path / "gaas-targets.toml"
    text = _gaas_with(TARGETS.replace(old, new))
    assert text != _gaas_with(TARGETS)
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    code, err = _run(["masses", str(path), "--cutoff-eV", "60", "--out", str(out)])
    assert code == 2, err
    line = err.strip()
    assert "\n" not in line and f"{path.name}: {key}: " in line and "Traceback" not in line
    assert not out.exists()


@pytest.mark.parametrize(("name", "problem"), [("d", "internal strain"),
                                               ("xi_u", "no such deformation potential")])
def test_targets_the_crystal_cannot_have_are_refused(name, problem, tmp_path):
    # GaAs: no measured ζ is known to bandpert, so no d target; its conduction minimum is at Γ,
    # which has no uniaxial Ξ_u (Herring & Vogt, Phys. Rev. 101, 944 (1956)).
    path = tmp_path / "gaas-target.toml"
    path.write_text(_gaas_with(f'[potential.deformation_targets]\n{name} = {{ value_eV = -4.8, '
                               'source = "Vurgaftman, Meyer & Ram-Mohan 2001" }'),
                    encoding="utf-8")
    code, err = _run(["masses", str(path), "--cutoff-eV", "60", "--out", str(tmp_path / "o")])
    assert code == 2, err
    assert len(err.strip().splitlines()) == 1
    assert f"potential.deformation_targets.{name}: " in err and problem in err


def test_targets_need_tabulated_form_factors():
    doc = strain_following_document(read_toml_document(MATERIALS / "silicon.toml"), "si",
                                    CUTOFF_EV).document
    doc["potential"]["deformation_targets"] = {"b": {"value_eV": -2.1, "source": "Laude 1971"}}
    with pytest.raises(InputError) as info:
        parse_material(doc, "si-continuous.toml")
    assert info.value.key == "potential.deformation_targets" and "tabulated" in str(info.value)


@settings(max_examples=40, deadline=None)
@given(st.sampled_from(["indirect_gap", "gamma_gap", "x_gap", "l_gap", "xi_u", "b", "d"]),
       st.floats(-60.0, 60.0, allow_nan=False), st.floats(1e-3, 60.0))
def test_deformation_targets_read_back_or_are_refused_by_range(name, value, sigma):
    # Range rule of [potential.deformation_targets] (README, material keys): values within ±50 eV
    # and uncertainties in (0, 50] eV are read back exactly; anything else names its key.
    doc = read_toml_document(MATERIALS / "silicon.toml")
    doc["potential"]["deformation_targets"] = {
        name: {"value_eV": value, "uncertainty_eV": sigma, "source": "test"}}
    if abs(value) <= 50.0 and sigma <= 50.0:
        (t,) = parse_material(doc, "si.toml").potential.deformation_targets
        assert (t.name, t.value_eV, t.uncertainty_eV, t.source) == (name, value, sigma, "test")
    else:
        with pytest.raises(InputError) as info:
            parse_material(doc, "si.toml")
        field = "value_eV" if abs(value) > 50.0 else "uncertainty_eV"
        assert info.value.key == f"potential.deformation_targets.{name}.{field}"
