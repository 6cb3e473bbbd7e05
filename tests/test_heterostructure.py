"""Heterostructures: alloys of k·p files, structure files, one-band subbands, the command."""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pytest
import scipy.optimize

from bandpert.errors import InputError, ModelWarning
from bandpert.heterostructure import compute_subbands, layer_edges, one_band_levels
from bandpert.input.alloy_file import load_alloy
from bandpert.input.kp_file import load_kp_material
from bandpert.input.structure_file import parse_structure
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C

ALGAAS = "aluminium-gallium-arsenide"


def _structure(layers, **top):
    doc = {"name": "test", "source": "the tests' own", "layers": layers, **top}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ModelWarning)
        return parse_structure(doc, "test.toml")


def _well(width_nm: float, barrier_nm: float, x: float = 0.3, **top):
    barrier = {"alloy": ALGAAS, "x": x, "thickness_nm": barrier_nm}
    return _structure([barrier, {"material": "gallium-arsenide", "thickness_nm": width_nm},
                       dict(barrier)], **top)


def _finite_well_levels(width_A, v0, m_w, m_b):
    """Bound levels of a finite square well with BenDaniel–Duke conditions.

    source: D. J. BenDaniel & C. B. Duke, Phys. Rev. 152, 683 (1966) (ψ and ψ'/m continuous);
    with k = √(2m_wE)/ħ, κ = √(2m_b(V0 − E))/ħ the even levels solve (k/m_w) tan(kL/2) = κ/m_b
    and the odd ones −(k/m_w) cot(kL/2) = κ/m_b (G. Bastard, Wave Mechanics Applied to
    Semiconductor Heterostructures, 1988, ch. 1; from memory).
    """
    def k(e):
        return np.sqrt(m_w * e / C)

    def kappa(e):
        return np.sqrt(m_b * (v0 - e) / C)

    even = lambda e: k(e) / m_w * np.sin(k(e) * width_A / 2) - kappa(e) / m_b * np.cos(  # noqa: E731
        k(e) * width_A / 2)
    odd = lambda e: -k(e) / m_w * np.cos(k(e) * width_A / 2) - kappa(e) / m_b * np.sin(  # noqa: E731
        k(e) * width_A / 2)
    grid = np.linspace(1e-9, v0 * (1 - 1e-12), 20001)
    roots = []
    for f in (even, odd):
        y = f(grid)
        for i in np.nonzero(np.sign(y[:-1]) != np.sign(y[1:]))[0]:
            roots.append(scipy.optimize.brentq(f, grid[i], grid[i + 1], xtol=1e-14))
    return np.sort(roots)


def _conduction(structure):
    edges = layer_edges(structure)
    well, barrier = edges[1], edges[0]
    return well, barrier


# --- alloys -------------------------------------------------------------------------------------

def test_algaas_gap_bows_as_published_and_warns_where_x_is_lowest():
    alloy = load_alloy(ALGAAS)
    gaas, alas = load_kp_material("gallium-arsenide"), load_kp_material("aluminium-arsenide")
    for x in (0.0, 0.3, 0.7, 1.0):
        eg = alloy.at(x).parameters.Eg_eV
        # source: Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001): AlGaAs Γ-gap
        # bowing C = −0.127 + 1.310x eV (from memory)
        want = ((1 - x) * gaas.parameters.Eg_eV + x * alas.parameters.Eg_eV
                - x * (1 - x) * (-0.127 + 1.310 * x))
        assert eg == pytest.approx(want, abs=1e-12)
    # the valence-band offset interpolates linearly (same source: no VBO bowing for AlGaAs)
    assert alloy.at(0.3).valence_band_eV == pytest.approx(0.7 * -0.80 + 0.3 * -1.33, abs=1e-12)
    assert alloy.valley_note(0.3) == ""
    # source: the X valley of AlGaAs crosses below Γ near x ≈ 0.4–0.45 (Vurgaftman 2001; from
    # memory); with the bundled values the crossing is at x ≈ 0.41
    assert "not Γ" in alloy.valley_note(0.45)
    with pytest.warns(ModelWarning, match="not Γ"):
        parse_structure({"name": "t", "source": "s", "layers": [
            {"alloy": ALGAAS, "x": 0.6, "thickness_nm": 5}]}, "t.toml")


def test_ingaas_lattice_matched_to_inp_near_x_053():
    alloy = load_alloy("indium-gallium-arsenide")
    inp = load_kp_material("indium-phosphide")
    # source: In0.53Ga0.47As is lattice-matched to InP (Vurgaftman 2001; common practice)
    assert alloy.at(0.53).a_A == pytest.approx(inp.a_A, rel=1e-3)
    # bowed gap: C = 0.477 eV (same source, from memory); 0.816 eV at 0 K
    assert alloy.at(0.53).parameters.Eg_eV == pytest.approx(0.816, abs=0.002)


# --- one band: finite, infinite and periodic wells -------------------------------------------

def test_finite_well_levels_match_bendaniel_duke_to_0p1_meV():
    s = _well(10.0, 40.0)
    r = compute_subbands(s, 0.1, n_levels=3)
    well, barrier = _conduction(s)
    want = _finite_well_levels(100.0, barrier.conduction_eV - well.conduction_eV, well.m_e,
                               barrier.m_e)
    got = r.levels_eV["conduction"] - well.conduction_eV
    assert want.size == 3 and r.bound["conduction"].all()
    np.testing.assert_allclose(got, want, atol=1e-4)  # 0.1 meV
    assert np.abs(got - want).max() < 6e-5  # measured: 0.012, 0.041, 0.045 meV at 0.1 nm


def test_error_falls_as_h_squared():
    errors = []
    for h in (0.4, 0.2, 0.1):
        s = _well(10.0, 20.0)
        well, barrier = _conduction(s)
        want = _finite_well_levels(100.0, barrier.conduction_eV - well.conduction_eV,
                                   well.m_e, barrier.m_e)[0]
        e = compute_subbands(s, h, n_levels=1).levels_eV["conduction"][0]
        errors.append(abs(e - well.conduction_eV - want))
    slopes = np.diff(np.log(errors)) / np.diff(np.log([0.4, 0.2, 0.1]))
    # common practice, no source: a second-order scheme (interfaces on half-nodes)
    assert np.all((slopes > 1.9) & (slopes < 2.1)), (errors, slopes)


def test_infinite_barrier_limit():
    s = _structure([{"material": "gallium-arsenide", "thickness_nm": 8.0}])
    r = compute_subbands(s, 0.05, n_levels=4)
    well = layer_edges(s)[0]
    n = np.arange(1, 5)
    # source: the particle in a box, E_n = ħ²π²n²/(2 m_w L²) (any quantum-mechanics text)
    want = C * (math.pi * n / 80.0) ** 2 / well.m_e
    got = r.levels_eV["conduction"] - well.conduction_eV
    kh = math.pi * n / 80.0 * 0.5
    # the sine modes are exact on the cell-centred grid with the walls on the outer faces, so
    # the only error is the three-point Laplacian's, E_h = E sin²(kh/2)/(kh/2)²
    # (common practice, no source): E (1 − (kh)²/12 + …)
    np.testing.assert_allclose(got, want * (np.sin(kh / 2) / (kh / 2)) ** 2, rtol=1e-9)
    np.testing.assert_allclose(got, want, rtol=(kh[-1] ** 2) / 12 * 1.01)


@pytest.mark.parametrize("width_nm", [3.0, 6.0, 12.0, 20.0])
def test_bound_state_count(width_nm):
    s = _well(width_nm, 30.0)
    r = compute_subbands(s, 0.1, n_levels=20)
    well, barrier = _conduction(s)
    v0 = barrier.conduction_eV - well.conduction_eV
    # source: issue 19 / Bastard 1988 ch. 1: N = ⌈L √(2 m_w V0)/(πħ)⌉, independent of m_b
    want = math.ceil(width_nm * 10 * math.sqrt(well.m_e * v0 / C) / math.pi)
    assert int(r.bound["conduction"].sum()) == want
    # the same count with a very different barrier mass
    h = 1.0
    nb, nw = int(300 / h), int(width_nm * 10 / h)
    v = np.r_[np.full(nb, v0), np.zeros(nw), np.full(nb, v0)]
    for m_b in (0.02, 0.067, 0.5):
        m = np.r_[np.full(nb, m_b), np.full(nw, well.m_e), np.full(nb, m_b)]
        e, _ = one_band_levels(v, m, h, 20)
        assert int(np.sum(e < v0)) == want


def test_superlattice_miniband_edges_match_bastard():
    lw, lb = 50.0, 30.0  # Å
    s = _structure([{"material": "gallium-arsenide", "thickness_nm": lw / 10},
                    {"alloy": ALGAAS, "x": 0.3, "thickness_nm": lb / 10}], periodic=True)
    r = compute_subbands(s, 0.05, n_levels=2)
    edges = layer_edges(s)
    well, barrier = edges[0], edges[1]
    v0 = barrier.conduction_eV - well.conduction_eV
    m_w, m_b = well.m_e, barrier.m_e

    def rhs(e):
        """source: G. Bastard, Phys. Rev. B 24, 5693 (1981): cos qd = cos kL_w cosh κL_b
        + ½(ξ − 1/ξ) sin kL_w sinh κL_b, ξ = m_w κ/(m_b k), for E < V0."""
        k = math.sqrt(m_w * e / C)
        kap = math.sqrt(m_b * (v0 - e) / C)
        xi = m_w * kap / (m_b * k)
        return (math.cos(k * lw) * math.cosh(kap * lb)
                + 0.5 * (xi - 1 / xi) * math.sin(k * lw) * math.sinh(kap * lb))

    grid = np.linspace(1e-6, v0 * (1 - 1e-9), 4001)
    got_q0 = r.levels_eV["conduction"] - well.conduction_eV
    got_pi = r.miniband_edge_eV["conduction"] - well.conduction_eV
    for target, got in ((1.0, got_q0), (-1.0, got_pi)):
        f = np.array([rhs(e) - target for e in grid])
        roots = [scipy.optimize.brentq(lambda e, t=target: rhs(e) - t, grid[i], grid[i + 1],
                                       xtol=1e-14)
                 for i in np.nonzero(np.sign(f[:-1]) != np.sign(f[1:]))[0]]
        assert len(roots) >= 1
        np.testing.assert_allclose(got[0], roots[0], atol=1e-4)  # 0.1 meV
    assert got_pi[0] > got_q0[0]  # the ground miniband has its bottom at q = 0


def test_symmetric_well_parity():
    s = _well(8.0, 10.0)
    r = compute_subbands(s, 0.1, n_levels=3)
    for band in ("conduction", "heavy hole", "light hole"):
        for rho in r.densities_per_nm[band]:
            np.testing.assert_allclose(rho, rho[::-1], atol=1e-9 * rho.max())
    # the envelope itself: even, odd, even (common practice, no source)
    z = r.z_nm
    v = r.edges_eV["conduction"]
    m = np.where(v > v.min() + 1e-9, layer_edges(s)[0].m_e, layer_edges(s)[1].m_e)
    _, psi = one_band_levels(v, m, 1.0, 3)
    for i in range(3):
        sign = 1 if i % 2 == 0 else -1
        np.testing.assert_allclose(psi[::-1, i], sign * psi[:, i], atol=1e-8)
    assert z.size == 280


def test_compressive_ingaas_on_gaas_puts_heavy_holes_on_top():
    s = _structure([{"alloy": "indium-gallium-arsenide", "x": 0.2, "thickness_nm": 5.0}],
                   substrate="gallium-arsenide")
    e = layer_edges(s)[0]
    eps = e.strain
    assert eps[0, 0] < 0 < eps[2, 2]  # compressed in the plane, stretched along z
    assert e.heavy_hole_eV > e.light_hole_eV  # common practice, no source (Chuang 1995 ch. 4)


# --- bad input ---------------------------------------------------------------------------------

@pytest.mark.parametrize("layers,top,key,words", [
    ([{"material": "no-such-material", "thickness_nm": 5}], {}, "layers[0].material",
     "cannot be used"),
    ([{"material": "gallium-arsenide", "thickness_nm": 0}], {}, "layers[0].thickness_nm",
     "must be positive"),
    ([{"material": "gallium-arsenide", "thickness_nm": -2}], {}, "layers[0].thickness_nm",
     "must be positive"),
    ([{"material": "gallium-arsenide", "thickness_nm": 5}], {"growth": "112"}, "growth",
     "is not one of"),
    ([{"material": "gallium-arsenide", "alloy": ALGAAS, "x": 0.1, "thickness_nm": 5}], {},
     "layers[0].material", "exactly one of"),
    ([{"alloy": ALGAAS, "thickness_nm": 5}], {}, "layers[0].x", "missing"),
    ([{"alloy": ALGAAS, "x": 1.5, "thickness_nm": 5}], {}, "layers[0].x", "outside"),
    ([{"material": "gallium-arsenide", "thickness_nm": 5, "colour": 1}], {},
     "layers[0].colour", "unknown key"),
    ([], {}, "layers", "non-empty"),
    ([{"material": "gallium-arsenide", "thickness_nm": 5}], {"substrate": -1}, "substrate",
     "lattice constant"),
])
def test_bad_structure_files_are_one_line_errors(layers, top, key, words):
    with pytest.raises(InputError) as info:
        _structure(layers, **top)
    text = str(info.value)
    assert text.startswith(f"test.toml: {key}: ") and words in text and "\n" not in text


def test_missing_offsets_and_bad_spacing_are_refused(tmp_path):
    doc = (load_kp_material("gallium-arsenide").file)
    text = open(doc, encoding="utf-8").read()
    bare = tmp_path / "no-offset.toml"
    bare.write_text(text[:text.index("[alignment]")], encoding="utf-8")
    with pytest.raises(InputError) as info:
        parse_structure({"name": "t", "source": "s", "layers": [
            {"material": "no-offset.toml", "thickness_nm": 5}]}, str(tmp_path / "s.toml"))
    assert info.value.key == "layers[0].valence_band_eV"
    s = _well(10.05, 10.0)
    with pytest.raises(InputError) as info:
        compute_subbands(s, 0.1)
    assert info.value.key == "layers[1].thickness_nm" and "whole number" in str(info.value)


# --- the command ---------------------------------------------------------------------------

STRUCTURE = """name = "GaAs/Al0.3Ga0.7As 10 nm well"
source = "the tests' own"
[[layers]]
alloy = "aluminium-gallium-arsenide"
x = 0.3
thickness_nm = 8
[[layers]]
material = "gallium-arsenide"
thickness_nm = 10
[[layers]]
alloy = "aluminium-gallium-arsenide"
x = 0.3
thickness_nm = 8
"""


def _cli(args):
    import contextlib
    import io

    import bandpert.cli.app as cli

    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        with pytest.raises(SystemExit) as stop:
            cli.main(args)
    return stop.value.code or 0, stdout.getvalue(), stderr.getvalue()


def test_subbands_command_writes_json_csv_and_figure(tmp_path):
    path = tmp_path / "well.toml"
    path.write_text(STRUCTURE, encoding="utf-8")
    code, out, err = _cli(["subbands", str(path), "--out", str(tmp_path / "o")])
    assert code == 0, err
    doc = json.loads((tmp_path / "o" / "well-subbands.json").read_text("utf-8"))
    assert doc["command"] == "subbands"
    c = doc["results"]["bands"]["conduction"]
    assert c["labels"][:2] == ["E1", "E2"] and len(c["density_per_nm"][0]) == 260
    rows = (tmp_path / "o" / "well-subbands.csv").read_text("utf-8").splitlines()
    assert rows[2] == "band,label,energy_eV,bound" and len(rows) == 3 + 9
    assert (tmp_path / "o" / "well-subbands.png").stat().st_size > 0
    assert "E1-HH1" in out


def test_subbands_figure_has_no_overlapping_text():
    from figure_cases import text_problems

    from bandpert.output.figures.subbands import subband_figure

    for s in (_well(10.0, 8.0), _structure([
            {"material": "gallium-arsenide", "thickness_nm": 5.0},
            {"alloy": ALGAAS, "x": 0.3, "thickness_nm": 3.0}], periodic=True)):
        assert text_problems(subband_figure(compute_subbands(s, 0.1))) == []


@pytest.mark.parametrize("args,words", [
    (["--spacing-nm", "0.3"], "whole number of grid cells"),
    (["--levels", "0"], "--levels: expected 1 to 50"),
    (["--model", "nine-band"], "--model: 'nine-band' is not one of"),
])
def test_subbands_command_refuses_bad_options(tmp_path, args, words):
    path = tmp_path / "well.toml"
    path.write_text(STRUCTURE, encoding="utf-8")
    code, _, err = _cli(["subbands", str(path), "--out", str(tmp_path / "o"), *args])
    assert code == 2 and len(err.splitlines()) == 1 and words in err, err
    assert not (tmp_path / "o").exists()


# --- multiband -----------------------------------------------------------------------------------

def test_four_band_holes_at_zero_k_equal_one_band_with_luttinger_masses():
    s = _well(6.0, 8.0)
    one = compute_subbands(s, 0.1, n_levels=2, model="one-band")
    four = compute_subbands(s, 0.1, n_levels=2, model="four-band")
    # source: issue 19; Luttinger, Phys. Rev. 102, 1030 (1956): along [001] at k∥ = 0 the
    # Γ8 block splits into heavy and light holes with m0/m = γ1 ∓ 2γ2 (the one-band masses)
    for band in ("heavy hole", "light hole"):
        # levels near the barrier edge reach the ends, where the two models' walls differ
        b = one.levels_eV[band] > one.edges_eV[band][0] + 0.02
        assert b[0]
        np.testing.assert_allclose(four.levels_eV[band][b], one.levels_eV[band][b], atol=1e-6)


def _kane_one_band_e1(s, h_nm=0.1):
    """E1 of the one-band BenDaniel–Duke model with Kane's energy-dependent mass in each layer,
    m0/m(E) = s_c + (Ep/3)[2/(E − E_v) + 1/(E − E_v + Δ)] (E. O. Kane, J. Phys. Chem. Solids 1,
    249 (1957), the three-level conduction band; from memory), with the eight-band model's own
    s_c = 1 and rescaled Ep, iterated to self-consistency."""
    from bandpert.heterostructure import build_grid
    from bandpert.heterostructure.multiband import rescaled_parameters

    grid = build_grid(s, h_nm)
    edges = layer_edges(s)
    ec = grid.on_nodes([e.conduction_eV for e in edges])
    e1 = ec.min() + 0.03
    for _ in range(40):
        masses = []
        for layer in s.layers:
            p = rescaled_parameters(layer.material.parameters)
            x = e1 - layer.valence_band_eV
            masses.append(1.0 / (1.0 + p.Ep_eV / 3 * (2 / x + 1 / (x + p.Delta_so_eV))))
        e1 = one_band_levels(ec, grid.on_nodes(masses), grid.spacing_A, 1)[0][0]
    return e1


def test_eight_band_well_no_spurious_states_kane_ground_level_and_hole_order():
    from bandpert.heterostructure import build_grid
    from bandpert.heterostructure.multiband import _operator, _shift_invert, layer_matrices

    s = _well(10.0, 10.0)
    r = compute_subbands(s, 0.1, n_levels=2, model="eight-band")
    parabolic = compute_subbands(s, 0.1, n_levels=1).levels_eV["conduction"][0]
    kane = _kane_one_band_e1(s)
    e1 = r.levels_eV["conduction"][0]
    # issue 19: within 1 meV of the Kane-mass one-band level; measured −0.15 meV, while the
    # nonparabolic shift itself (Kane − parabolic) is +0.47 meV
    assert abs(e1 - kane) < 1e-3 and abs(e1 - kane) < abs(kane - parabolic)
    assert r.levels_eV["heavy hole"][0] > r.levels_eV["light hole"][0]  # HH1 above LH1
    # no state inside the gap: the levels nearest mid-gap are E1 and HH1 themselves
    grid = build_grid(s, 0.1)
    a = _operator(grid, layer_matrices(s, "eight-band"), np.zeros(2), "eight-band", None)
    mid = 0.5 * (e1 + r.levels_eV["heavy hole"][0])
    vals, _ = _shift_invert(a, 8, mid)
    inside = vals[(vals > r.levels_eV["heavy hole"][0] + 1e-6) & (vals < e1 - 1e-6)]
    assert inside.size == 0, inside


def test_foreman_rescaling_gives_the_valence_terms_the_right_sign():
    from bandpert.heterostructure.multiband import rescaled_parameters
    from bandpert.input.kp_parameters import modified_luttinger

    p = load_kp_material("gallium-arsenide").parameters
    g1, g2, _ = modified_luttinger(p.gamma1, p.gamma2, p.gamma3, p.Eg_eV, p.Ep_eV)
    # source: issue 19 (GaAs, Vurgaftman 2001 values): γ1′ ≈ 0.66, γ2′ ≈ −1.10 unrescaled
    assert g1 == pytest.approx(0.66, abs=0.01) and g2 == pytest.approx(-1.10, abs=0.01)
    assert g1 + 2 * g2 < 0
    q = rescaled_parameters(p)
    from bandpert.kp import conduction_inverse_mass

    # the band-edge electron mass is kept (Foreman, Phys. Rev. B 56, R12748 (1997), the
    # rescaling of Ep; from memory)
    assert conduction_inverse_mass(q.Eg_eV, q.Delta_so_eV, q.Ep_eV, q.F) == pytest.approx(
        conduction_inverse_mass(p.Eg_eV, p.Delta_so_eV, p.Ep_eV, p.F), rel=1e-12)
    h1, h2, _ = modified_luttinger(q.gamma1, q.gamma2, q.gamma3, q.Eg_eV, q.Ep_eV)
    assert q.F == 0 and h1 + 2 * h2 > 0 and h1 - 2 * h2 > 0


def test_in_plane_masses_of_a_well():
    from bandpert.heterostructure import in_plane_dispersion, rescaled_parameters

    s = _well(10.0, 8.0)
    d = in_plane_dispersion(s, "eight-band", k_max_invA=0.02, n_k=3, n_levels=2)
    m100, m110 = d.in_plane_mass_m0["100"], d.in_plane_mass_m0["110"]
    # the Γ6 band is isotropic: E1's in-plane mass is the same along [100] and [110]
    assert m100["conduction"][0] == pytest.approx(m110["conduction"][0], rel=1e-4)
    # E1 in plane: to first order m0/m∥ = ⟨m0/m(E1, z)⟩ over |ψ|² with Kane's energy-dependent
    # masses (U. Ekenberg, Phys. Rev. B 40, 7714 (1989); from memory); the energy dependence
    # of the operator adds a few per cent, hence the 5 % tolerance
    r = compute_subbands(s, 0.1, n_levels=1, model="eight-band")
    e1 = r.levels_eV["conduction"][0]
    from bandpert.heterostructure import build_grid

    grid = build_grid(s, 0.1)
    inv = []
    for layer in s.layers:
        p = rescaled_parameters(layer.material.parameters)
        x = e1 - layer.valence_band_eV
        inv.append(1 + p.Ep_eV / 3 * (2 / x + 1 / (x + p.Delta_so_eV)))
    rho = r.densities_per_nm["conduction"][0]
    average = 1 / np.sum(rho / rho.sum() * grid.on_nodes(inv))
    assert m100["conduction"][0] == pytest.approx(average, rel=0.05)
    # HH1 is hole-like in plane and LH1 electron-like near k∥ = 0 (heavy/light-hole mixing;
    # D. A. Broido & L. J. Sham, Phys. Rev. B 31, 888 (1985); from memory)
    assert m100["valence"][0] < 0 < m100["valence"][1]
    assert d.conduction_eV["100"].shape == (3, 2) and d.valence_eV["110"].shape == (3, 2)


def test_multiband_superlattice_heavy_holes_match_one_band_miniband_edges():
    s = _structure([{"material": "gallium-arsenide", "thickness_nm": 5.0},
                    {"alloy": ALGAAS, "x": 0.3, "thickness_nm": 3.0}], periodic=True)
    one = compute_subbands(s, 0.1, n_levels=1, model="one-band")
    four = compute_subbands(s, 0.1, n_levels=1, model="four-band")
    # at k∥ = 0 along [001] the heavy hole decouples (Luttinger 1956), so the four-band heavy-hole
    # miniband is the one-band one with m0/(γ1 − 2γ2) at both edges (q = 0 and q = π/d)
    np.testing.assert_allclose(four.levels_eV["heavy hole"], one.levels_eV["heavy hole"],
                               atol=1e-9)
    np.testing.assert_allclose(four.miniband_edge_eV["heavy hole"],
                               one.miniband_edge_eV["heavy hole"], atol=1e-9)


# --- in-plane dispersion on the engine, its figure and the command ------------------------------

def test_in_plane_points_on_the_engine_equal_the_serial_ones(dask_scheduler):
    from bandpert.runs.execution import Engine
    from bandpert.runs.in_plane import in_plane_on_engine

    s = _well(6.0, 4.0)
    serial = in_plane_on_engine(s, "eight-band", 0.03, 4, 2, 0.2)
    spread = in_plane_on_engine(s, "eight-band", 0.03, 4, 2, 0.2,
                                Engine("scheduler", address=dask_scheduler))
    # one BLAS thread per solve either way: the same numbers wherever a point ran
    for d in ("100", "110"):
        np.testing.assert_allclose(spread.conduction_eV[d], serial.conduction_eV[d], atol=1e-10)
        np.testing.assert_allclose(spread.valence_eV[d], serial.valence_eV[d], atol=1e-10)
    # at k∥ = 0 the dispersion's first row is the k∥ = 0 solver's levels (fewer Lanczos extras)
    r = compute_subbands(s, 0.2, n_levels=2, model="eight-band")
    np.testing.assert_allclose(serial.conduction_eV["100"][0], r.levels_eV["conduction"],
                               atol=1e-9)
    v = np.sort(np.concatenate([r.levels_eV["heavy hole"], r.levels_eV["light hole"]]))[::-1]
    np.testing.assert_allclose(serial.valence_eV["110"][0], v[:2], atol=1e-9)


def test_in_plane_dispersion_of_a_four_band_well_is_anisotropic_and_figure_is_legible():
    from figure_cases import text_problems

    from bandpert.heterostructure import in_plane_dispersion
    from bandpert.output.figures.subband_dispersion import dispersion_figure

    d = in_plane_dispersion(_well(8.0, 6.0), "four-band", 0.04, 5, 2, 0.2)
    assert d.conduction_eV["100"].shape == (5, 0)
    # the Luttinger valence band is warped when γ2 ≠ γ3 (Luttinger 1956): at |k∥| = 0.04 1/Å
    # the highest subband differs between [100] and [110] (common practice, no source)
    assert abs(d.valence_eV["100"][-1, 0] - d.valence_eV["110"][-1, 0]) > 1e-4
    np.testing.assert_allclose(d.valence_eV["100"][0], d.valence_eV["110"][0], atol=1e-12)
    assert text_problems(dispersion_figure(d)) == []


def test_subbands_command_in_plane_writes_the_dispersion(tmp_path):
    path = tmp_path / "well.toml"
    path.write_text(STRUCTURE, encoding="utf-8")
    code, out, err = _cli(["subbands", str(path), "--out", str(tmp_path / "o"), "--model",
                           "four-band", "--in-plane", "0.03", "--k-points", "3", "--levels",
                           "2", "--engine", "serial"])
    assert code == 0, err
    doc = json.loads((tmp_path / "o" / "well-subbands.json").read_text("utf-8"))
    ip = doc["results"]["in_plane"]
    assert ip["k_invA"] == pytest.approx([0.0, 0.015, 0.03])
    assert len(ip["directions"]["110"]["valence_eV"]) == 3
    assert doc["settings"]["engine"].startswith("serial")
    assert (tmp_path / "o" / "well-subbands-in-plane.png").stat().st_size > 0
    assert "in-plane masses" in out


def test_bundled_example_structure_is_found_by_name():
    from bandpert.input.structure_file import load_structure

    with warnings.catch_warnings():
        warnings.simplefilter("error", ModelWarning)  # x = 0.3: Γ is the lowest valley
        s = load_structure("gallium-arsenide-well")
    assert [layer.thickness_nm for layer in s.layers] == [10.0, 10.0, 10.0]
    a = compute_subbands(s, 0.1, 2).levels_eV
    b = compute_subbands(_well(10.0, 10.0), 0.1, 2).levels_eV
    for band in a:
        np.testing.assert_allclose(a[band], b[band], atol=1e-12)


# --- growth along [110] and [111] --------------------------------------------------------------

def test_111_well_four_band_holes_equal_one_band_with_111_luttinger_masses():
    s = _well(6.0, 8.0, growth="111")
    one = compute_subbands(s, 0.1, n_levels=2, model="one-band")
    four = compute_subbands(s, 0.1, n_levels=2, model="four-band")
    g = s.layers[1].material.parameters
    # source: issue 19; Luttinger, Phys. Rev. 102, 1030 (1956) (from memory): along [111] the
    # Γ8 block splits into |m| = 3/2 and 1/2 along n with m0/m = γ1 ∓ 2γ3, and since the
    # splitting axis is the same in every layer the four-band levels at k∥ = 0 are the one-band
    # BenDaniel–Duke levels with those masses
    assert layer_edges(s)[1].m_hh == pytest.approx(1 / (g.gamma1 - 2 * g.gamma3), rel=1e-12)
    assert layer_edges(s)[1].m_lh == pytest.approx(1 / (g.gamma1 + 2 * g.gamma3), rel=1e-12)
    for band in ("heavy hole", "light hole"):
        b = one.levels_eV[band] > one.edges_eV[band][0] + 0.02  # away from the end walls
        assert b[0]
        np.testing.assert_allclose(four.levels_eV[band][b], one.levels_eV[band][b], atol=1e-6)
    # and they differ from the [001] levels (the masses differ: γ2 ≠ γ3)
    assert abs(four.levels_eV["heavy hole"][0]
               - compute_subbands(_well(6.0, 8.0), 0.1, 1, "four-band").levels_eV[
                   "heavy hole"][0]) > 5e-3


def test_110_heavy_hole_confinement_mass():
    # one material with a lower valence top in the barriers: the Γ8 splitting axis along [110]
    # depends on γ2/γ3, so only equal Luttinger parameters in every layer decouple exactly
    gaas = {"material": "gallium-arsenide", "thickness_nm": 8.0, "valence_band_eV": -1.0}
    s = _structure([gaas, {"material": "gallium-arsenide", "thickness_nm": 6.0}, dict(gaas)],
                   growth="110")
    g = s.layers[1].material.parameters
    # source: Luttinger 1956 bulk dispersion along n (from memory; the kp module's
    # luttinger_inverse_masses): m0/m = γ1 ∓ 2√(γ2² + 3(γ3² − γ2²)(n_x²n_y² + …)), along [110]
    # γ1 ∓ √(γ2² + 3γ3²). The recalled m0/(γ1 − (γ2 + 3γ3)/2) is the linearised root:
    # for GaAs 1.555 against 1.503 (3.4 % apart), and the levels below follow the exact root
    root = math.sqrt(g.gamma2**2 + 3 * g.gamma3**2)
    assert layer_edges(s)[1].m_hh == pytest.approx(1 / (g.gamma1 - root), rel=1e-12)
    one = compute_subbands(s, 0.1, n_levels=2, model="one-band")
    four = compute_subbands(s, 0.1, n_levels=2, model="four-band")
    np.testing.assert_allclose(four.levels_eV["heavy hole"], one.levels_eV["heavy hole"],
                               atol=1e-9)
    # the well's HH1 from the transcendental BenDaniel–Duke roots with the exact [110] mass
    top = one.edges_eV["heavy hole"].max()
    v0 = top - one.edges_eV["heavy hole"].min()
    m = 1 / (g.gamma1 - root)
    hh1 = four.levels_eV["heavy hole"][0]
    assert hh1 == pytest.approx(top - _finite_well_levels(60.0, v0, m, m)[0], abs=2e-5)
    linear = 1 / (g.gamma1 - (g.gamma2 + 3 * g.gamma3) / 2)  # 0.34 meV away
    assert abs(top - _finite_well_levels(60.0, v0, linear, linear)[0] - hh1) > 2e-4


def test_bulk_along_111_reproduces_the_bulk_bands_along_lambda():
    from bandpert.heterostructure import build_grid
    from bandpert.heterostructure.grid import growth_frame
    from bandpert.heterostructure.multiband import (
        layer_matrices,
        multiband_levels,
        rescaled_parameters,
    )
    from bandpert.kp import make_model

    # one GaAs layer repeated along [111]: the Bloch states e^{ikz} with k = θ/L are the bulk
    # states at k n, n = [111]/√3 (the Λ line), and at k∥ ≠ 0 the bulk states at Rᵀ(k1, 0, k)
    # (common practice, no source: the bulk k·p bands themselves are the reference)
    s = _structure([{"material": "gallium-arsenide", "thickness_nm": 10.0}], growth="111",
                   periodic=True)
    grid, mats, edge = build_grid(s, 0.1), layer_matrices(s, "eight-band"), layer_edges(s)[0]
    bulk = make_model("eight-band", rescaled_parameters(s.layers[0].material.parameters))
    frame = growth_frame("111")
    for theta, k1, tol in ((0.3, 0.0, 1e-8), (0.3, 0.02, 1e-8), (math.pi, 0.0, 3e-5)):
        k = frame.T @ np.array([k1, 0.0, theta / grid.length_A])
        e = np.sort(bulk.energies_eV(k[None, :])[0]) + s.layers[0].valence_band_eV
        c = multiband_levels(grid, mats, "eight-band", 1, edge.conduction_eV - 0.01, "up",
                             k_par_invA=(k1, 0.0), phase=theta)[0]
        v = multiband_levels(grid, mats, "eight-band", 1, edge.heavy_hole_eV + 0.01, "down",
                             k_par_invA=(k1, 0.0), phase=theta)[0]
        assert c[0] == pytest.approx(e[6], abs=tol) and v[0] == pytest.approx(e[5], abs=tol)
    # the rotation matters: the [001] valence top at the same |k| is elsewhere
    k001 = np.array([0.0, 0.0, math.pi / grid.length_A])
    assert abs(np.sort(bulk.energies_eV(k001[None, :])[0])[5]
               - np.sort(bulk.energies_eV((frame.T @ k001)[None, :])[0])[5]) > 1e-4


def test_strained_111_layers_warn_of_the_piezoelectric_field_and_disperse_in_plane():
    from bandpert.heterostructure import in_plane_dispersion

    s = _structure([{"material": "gallium-arsenide", "thickness_nm": 4.0},
                    {"material": "indium-arsenide", "thickness_nm": 1.0},
                    {"material": "gallium-arsenide", "thickness_nm": 4.0}],
                   growth="111", substrate="gallium-arsenide")
    with pytest.warns(ModelWarning, match="piezoelectric"):
        r = compute_subbands(s, 0.1, 1, "eight-band")
    assert any("piezoelectric" in n for n in r.notes)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ModelWarning)
        d = in_plane_dispersion(s, "eight-band", 0.02, 2, 1, 0.1)
    assert list(d.valence_eV) == ["1-10", "11-2"] and d.growth == "111"
