"""Gap openings at free-electron degeneracies: predictions of degenerate perturbation theory
against exact levels, on the cosine lattice (Mathieu), aluminium, diamond against zincblende and
the empty lattice; the reasons a coupling vanishes; crossings; the `gaps` command."""

from __future__ import annotations

import json
from itertools import product

import numpy as np
import pytest
import scipy.special
from conftest import MATERIALS, bundled, make_material
from test_cli import run

from bandpert.cli.options import parse_point
from bandpert.crystal.lattice import standard_path
from bandpert.errors import InputError
from bandpert.physics.nfe_gaps import (
    KIND_CROSSING,
    REASON_COUPLED,
    REASON_EMPTY,
    REASON_NO_COEFFICIENT,
    REASON_NO_FORM_FACTOR,
    REASON_RANGE,
    REASON_STRUCTURE,
    coupling_reasons,
    examine_point,
    free_electron_groups,
    gap_analysis,
    k_centred_model,
    path_crossings,
    resolve_points,
)
from bandpert.planewave.model import build_model
from bandpert.units import HBAR2_OVER_2M0_EV_A2, RYDBERG_EV

A_CHAIN = 4.0
E_R = HBAR2_OVER_2M0_EV_A2 * np.pi**2 / A_CHAIN**2  # ħ²π²/(2 m0 a²)


def cosine_chain(q: float):
    """V(x) = 2 V1 cos(2πx/a) with V1 = q E_R: Mathieu's equation in z = πx/a (CONVENTIONS.md)."""
    return make_material({"type": "chain", "a_A": A_CHAIN}, [{"species": "X", "position": [0.0]}],
                         {"form": "fourier", "unit": "eV",
                          "coefficients": [{"miller": [1], "value": q * E_R}]},
                         basis={"cutoff_eV": 400 * E_R})


def group_at(point, first_index):
    return next(g for g in point.groups if g.first_index == first_index)


def point_named(report, label):
    return next(p for p in report.points if p.label == label)


# --------------------------------------------------------------------------------------------
# cosine lattice against Mathieu's characteristic values
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("q", [0.02, 0.05, 0.1, 0.2, 0.43, 1.0])
def test_cosine_first_gap_against_mathieu(q):
    # First gap, at the zone boundary X (k = π/a, period-2a solutions): E_R (a1 − b1)
    # (source: Abramowitz & Stegun, Handbook of Mathematical Functions, 1964, ch. 20, eq. 20.1.1
    # for the
    # equation; scipy.special.mathieu_a/mathieu_b for the values).
    report = gap_analysis(cosine_chain(q), n_bands=4, crossings=False)
    g = group_at(point_named(report, "X"), 0)
    assert g.degeneracy == 2 and g.status == "opens at first order"
    mathieu = E_R * (scipy.special.mathieu_a(1, q) - scipy.special.mathieu_b(1, q))
    assert g.exact_gaps_eV[0] == pytest.approx(mathieu, abs=1e-9 * E_R)
    # the 2|V_G| rule: first order gives exactly 2 V1 (Ashcroft & Mermin, Solid State Physics,
    # 1976, ch. 9, gap at a single Bragg plane; from memory) ...
    assert g.first_order_gaps_eV[0] == pytest.approx(2 * q * E_R, rel=1e-12)
    # ... and the exact gap approaches it as a1 − b1 = 2q − q³/32 + O(q⁵) (source: Abramowitz &
    # Stegun
    # 1964, eq. 20.2.25: a1 = 1 + q − q²/8 − q³/64 …, b1 = 1 − q − q²/8 + q³/64 …)
    if q <= 0.2:
        assert (g.exact_gaps_eV[0] - g.first_order_gaps_eV[0]) / E_R == pytest.approx(
            -q**3 / 32, rel=0.05)
    # at second order both levels shift alike (−q²/8): the gap keeps its first-order value
    assert g.second_order_gaps_eV[0] == pytest.approx(2 * q * E_R, rel=1e-12)


@pytest.mark.parametrize("q", [0.02, 0.05, 0.1, 0.2, 0.43, 1.0])
def test_cosine_second_gap_opens_only_at_second_order(q):
    # Second gap, at Γ (k = 0, G = ±2π/a, period-a solutions): E_R (a2 − b2) (scipy values).
    # V(2·2π/a) = 0, so nothing opens at first order; second order couples ±2π/a through G = 0:
    # H_{+−} = V1²/(4 E_R), a gap of E_R q²/2, and A&S eq. 20.2.25 (a2 = 4 + 5q²/12 − 763q⁴/13824,
    # b2 = 4 − q²/12 + 5q⁴/13824) give a2 − b2 = q²/2 − q⁴/18 + O(q⁶).
    report = gap_analysis(cosine_chain(q), n_bands=4, crossings=False)
    g = group_at(point_named(report, "Γ"), 1)
    assert g.degeneracy == 2
    assert g.first_order_gaps_eV[0] == pytest.approx(0.0, abs=1e-12)
    assert g.uncoupled and set(g.coupling_reason) == {REASON_RANGE}
    assert g.status == "opens at second order"
    assert g.second_order_gaps_eV[0] == pytest.approx(E_R * q**2 / 2, rel=1e-10)
    mathieu = E_R * (scipy.special.mathieu_a(2, q) - scipy.special.mathieu_b(2, q))
    assert g.exact_gaps_eV[0] == pytest.approx(mathieu, abs=1e-9 * E_R)
    if q <= 0.2:
        assert (g.exact_gaps_eV[0] - g.second_order_gaps_eV[0]) / E_R == pytest.approx(
            -q**4 / 18, rel=0.05)
        assert g.second_order_gaps_eV[0] / g.exact_gaps_eV[0] - 1 < 0.15 * q**2


def test_chain_free_bands_never_cross_inside_the_zone():
    # In 1D the reduced-zone free-electron bands only touch at Γ and X (common practice, no
    # source): no crossing between the labelled points.
    m = cosine_chain(0.1)
    assert path_crossings(build_model(m, m.cutoff_eV), m, 6) == []


# --------------------------------------------------------------------------------------------
# aluminium: nearly-free-electron metal
# --------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def aluminium_gaps():
    return gap_analysis(bundled("aluminium"), crossings=False)


def test_aluminium_first_order_gaps_are_twice_the_fourier_coefficients(aluminium_gaps):
    # Gaps at L and X are 2|U111| and 2|U200| at first order (Ashcroft & Mermin, Solid State
    # Physics, 1976, ch. 9; U111 = 0.0179 Ry, U200 = 0.0562 Ry: Ashcroft, Phil. Mag. 8, 2055
    # (1963), as in the bundled aluminium.toml, from memory).
    lg = group_at(point_named(aluminium_gaps, "L"), 0)
    xg = group_at(point_named(aluminium_gaps, "X"), 0)
    assert lg.degeneracy == xg.degeneracy == 2
    assert lg.first_order_gaps_eV[0] == pytest.approx(2 * 0.0179 * RYDBERG_EV, rel=1e-10)
    assert xg.first_order_gaps_eV[0] == pytest.approx(2 * 0.0562 * RYDBERG_EV, rel=1e-10)


def test_aluminium_second_order_within_five_percent(aluminium_gaps):
    # The claim, measured: the second-order (Löwdin) subspace treatment brings the L and X
    # gaps within 5 % of exact (measured: −2.7 % at L, −0.6 % at X).
    for label in ("L", "X"):
        g = group_at(point_named(aluminium_gaps, label), 0)
        assert abs(g.second_order_gaps_eV[0] / g.exact_gaps_eV[0] - 1) < 0.05


def test_aluminium_first_order_l_gap_deviation_as_measured(aluminium_gaps):
    # The issue says "some 25 %" above exact for the first-order L gap; for this model (two
    # form factors, converged cutoff) it is 30 % (0.487 eV against 0.375 eV exact), and 2.8 %
    # at X (1.529 against 1.487 eV). The check pins the measured values.
    lg = group_at(point_named(aluminium_gaps, "L"), 0)
    xg = group_at(point_named(aluminium_gaps, "X"), 0)
    assert lg.first_order_gaps_eV[0] / lg.exact_gaps_eV[0] - 1 == pytest.approx(0.30, abs=0.02)
    assert xg.first_order_gaps_eV[0] / xg.exact_gaps_eV[0] - 1 == pytest.approx(0.028, abs=0.01)
    assert lg.exact_gaps_eV[0] == pytest.approx(0.375, abs=0.01)
    assert xg.exact_gaps_eV[0] == pytest.approx(1.487, abs=0.01)


def test_aluminium_uncoupled_pair_opens_at_second_order(aluminium_gaps):
    # At U (and K) the second pair differs by a (220) vector: no form factor that far out, so it
    # opens only at second order (the group's V block is zero).
    g = group_at(point_named(aluminium_gaps, "U"), 3)
    assert g.uncoupled and set(g.coupling_reason) == {REASON_RANGE}
    assert g.coupling_shell_g2 == pytest.approx([8.0])
    assert g.status == "opens at second order"
    assert "beyond the potential's range" in g.uncoupled_reason


# --------------------------------------------------------------------------------------------
# diamond against zincblende at X
# --------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def x_points():
    return {name: gap_analysis(bundled(name), points=["X"], crossings=False).points[0]
            for name in ("germanium", "gallium-arsenide")}


def test_diamond_levels_at_x_stay_paired(x_points):
    # In the diamond structure every level at X is (at least) twofold degenerate: the
    # non-symmorphic space group Fd-3m has only two-dimensional representations at X (common
    # practice, no source; e.g. Cohen & Bergstresser, Phys. Rev. 141, 789 (1966), Fig. 3 shows
    # Ge's X levels X1, X4 paired; from memory).
    ge = x_points["germanium"]
    assert ge.groups and all(m % 2 == 0 for g in ge.groups for m in g.exact_multiplets)
    low = group_at(ge, 0)
    # the lowest pair k + G = ±(2π/a)(1,0,0) differs by (200): cos(G·τ) = cos(π/2) = 0 kills it
    assert low.degeneracy == 2 and low.status == "closed"
    assert low.uncoupled and low.coupling_reason == (REASON_STRUCTURE,)
    assert np.max(np.abs(low.first_order_gaps_eV)) < 1e-12
    assert np.max(np.abs(low.second_order_gaps_eV)) < 1e-9


def test_zincblende_antisymmetric_form_factor_splits_x(x_points):
    # In zincblende V(200) = i V_A(4) sin(π/2): the antisymmetric form factor splits the X pair
    # that diamond keeps closed (Cohen & Bergstresser, Phys. Rev. 141, 789 (1966): V_A(4) =
    # 0.05 Ry for GaAs; from memory). First order gives 2|V_A(4)|; exact (measured) 4.05 eV,
    # the X1–X3 "ionic" splitting of the lowest valence bands.
    gaas = x_points["gallium-arsenide"]
    low = group_at(gaas, 0)
    assert low.degeneracy == 2 and low.status == "opens at first order"
    assert low.coupling_reason == (REASON_COUPLED,)
    assert abs(low.coupling_eV[0].real) < 1e-12  # purely imaginary: the sin(G·τ) part
    assert low.first_order_gaps_eV[0] == pytest.approx(2 * 0.05 * RYDBERG_EV, rel=1e-10)
    assert low.exact_gaps_eV[0] == pytest.approx(4.05, abs=0.05)
    # and some level that is paired in diamond is single in zincblende
    assert any(m % 2 for g in gaas.groups for m in g.exact_multiplets)
    assert [g.degeneracy for g in gaas.groups] == [g.degeneracy for g in x_points["germanium"]
                                                    .groups]


# --------------------------------------------------------------------------------------------
# the empty lattice
# --------------------------------------------------------------------------------------------


def empty_fcc():
    return make_material({"type": "fcc", "a_A": 4.0}, [{"species": "X", "position": [0, 0, 0]}],
                         {"form": "empty"}, basis={"cutoff_eV": 300.0})


def fcc_free_degeneracies(k_cubic, n_levels):
    """Independent count: fcc reciprocal lattice = (2π/a)(h,k,l), h, k, l all odd or all even;
    degeneracies of |k+G|² among the lowest levels (k in units of 2π/a, cubic axes)."""
    r = range(-6, 7)
    g = np.array([v for v in product(r, r, r) if len({x % 2 for x in v}) == 1], dtype=float)
    e = np.sort(np.round(np.sum((g + k_cubic) ** 2, axis=1), 9))
    values, starts, counts = np.unique(e, return_index=True, return_counts=True)
    return [int(c) for s, c in zip(starts, counts, strict=True) if s < n_levels]


def test_empty_lattice_gaps_are_zero_and_degeneracies_count():
    # Empty lattice: V = 0, every level keeps its free-electron degeneracy (Ashcroft & Mermin,
    # Solid State Physics, 1976, ch. 9, empty-lattice levels of fcc, Fig. 9.5; from memory).
    m = empty_fcc()
    report = gap_analysis(m, n_bands=30, crossings=True)
    cubic = {"Γ": (0, 0, 0), "X": (1, 0, 0), "L": (0.5, 0.5, 0.5), "W": (1, 0.5, 0)}
    b = build_model(m, 300.0).reciprocal_invA
    for label, kc in cubic.items():
        p = point_named(report, label)
        # the point given by seekpath is equivalent to the cubic one up to a cubic rotation
        k_cart = p.k_frac @ b / (2 * np.pi / 4.0)
        assert sorted(np.abs(k_cart)) == pytest.approx(sorted(np.abs(kc)), abs=1e-12)
        assert list(p.level_degeneracies) == fcc_free_degeneracies(np.array(kc), 30)
    # at Γ the shells of the bcc reciprocal lattice: 1, 8, 6, 12, 24 (common practice, no
    # source)
    assert list(point_named(report, "Γ").level_degeneracies) == [1, 8, 6, 12, 24]
    crossings = [p for p in report.points if p.kind == KIND_CROSSING]
    assert crossings
    for p in report.points:
        for g in p.groups:
            for gaps in (g.first_order_gaps_eV, g.second_order_gaps_eV, g.exact_gaps_eV):
                assert np.max(np.abs(gaps)) < 1e-9
            assert g.status == "closed" and set(g.coupling_reason) == {REASON_EMPTY}
            assert g.exact_eV == pytest.approx(np.full(g.degeneracy, g.free_electron_eV),
                                               abs=1e-9)


def test_square_empty_lattice_crossing_on_gamma_x():
    # Square lattice, k = (t/2)(2π/a) x̂ on Γ–X: E(1,0) = (t/2 + 1)² and E(−1,±1) = (t/2 − 1)² + 1
    # cross at t = 1/2 with E = 25/16 (2π/a)², three plane waves (derived here; common practice,
    # no source).
    m = make_material({"type": "square", "a_A": 3.0}, [{"species": "X", "position": [0, 0]}],
                      {"form": "empty"}, basis={"cutoff_eV": 200.0})
    report = gap_analysis(m, n_bands=8)
    p = next(p for p in report.points if p.kind == KIND_CROSSING and p.segment == ("Γ", "X")
             and abs(p.segment_fraction - 0.5) < 1e-12)
    g = p.groups[0]
    assert g.degeneracy == 3
    assert g.free_electron_eV == pytest.approx(
        HBAR2_OVER_2M0_EV_A2 * (2 * np.pi / 3.0) ** 2 * 25 / 16, rel=1e-12)
    assert p.path_distance_invA[0] == pytest.approx(0.5 * 0.5 * 2 * np.pi / 3.0, rel=1e-12)


# --------------------------------------------------------------------------------------------
# why a coupling vanishes
# --------------------------------------------------------------------------------------------


def cubic_miller(material, cubic):
    """Miller indices (reciprocal primitive basis) of G = (2π/a)·cubic."""
    b = build_model(material, 50.0).reciprocal_invA
    return np.rint(np.asarray(cubic, dtype=float) * (2 * np.pi / material.a_A)
                   @ np.linalg.inv(b)).astype(int)


def test_structure_factor_zero_against_beyond_range():
    # Diamond: V(G) = V_S cos(G·τ), τ = a(1,1,1)/8 (source: Cohen & Bergstresser 1966, eq. 2): a
    # form
    # factor listed on the (200) shell is still killed by cos(π/2) = 0 ("structure factor
    # zero"); (222) likewise (cos(3π/2)); (400) has cos(π) = −1 but no form factor that far out.
    diamond = make_material({"type": "fcc", "a_A": 5.43},
                            [{"species": "Si", "position": [0.125] * 3},
                             {"species": "Si", "position": [-0.125] * 3}],
                            {"form": "symmetric-antisymmetric", "unit": "Ry",
                             "shells": [3, 4, 8, 11], "symmetric": [-0.21, 0.1, 0.04, 0.08]},
                            basis={"cutoff_eV": 50.0})
    mil = cubic_miller(diamond, [(2, 0, 0), (2, 2, 2), (4, 0, 0), (1, 1, 1)])
    model = build_model(diamond, 200.0)
    idx = [int(np.flatnonzero((model.basis.miller == m).all(axis=1))[0]) for m in mil]
    zero = int(np.flatnonzero((model.basis.miller == 0).all(axis=1))[0])
    values = model.potential_eV[idx, zero]
    assert coupling_reasons(diamond, mil, values) == (
        REASON_STRUCTURE, REASON_STRUCTURE, REASON_RANGE, REASON_COUPLED)
    # fcc with one atom: no structure factor zero; (200) inside the range but not listed
    al = make_material({"type": "fcc", "a_A": 4.05}, [{"species": "Al", "position": [0, 0, 0]}],
                       {"form": "per-species", "unit": "Ry", "shells": [3, 8],
                        "species": {"Al": [0.0179, 0.01]}}, basis={"cutoff_eV": 50.0})
    mil = cubic_miller(al, [(2, 0, 0), (3, 1, 1)])
    assert coupling_reasons(al, mil, np.zeros(2)) == (REASON_NO_FORM_FACTOR, REASON_RANGE)
    # explicit Fourier coefficients: a missing G inside the reach, and one beyond it
    sq = bundled("square-demo")
    assert coupling_reasons(sq, np.array([[2, 1], [3, 0]]), np.zeros(2)) == (
        REASON_RANGE, REASON_RANGE)
    sq2 = make_material({"type": "square", "a_A": 3.0}, [{"species": "X", "position": [0, 0]}],
                        {"form": "fourier", "unit": "eV",
                         "coefficients": [{"miller": [2, 0], "value": 0.1}]})
    assert coupling_reasons(sq2, np.array([[1, 0], [1, 1], [2, 1]]), np.zeros(3)) == (
        REASON_NO_COEFFICIENT, REASON_NO_COEFFICIENT, REASON_RANGE)


# --------------------------------------------------------------------------------------------
# bookkeeping
# --------------------------------------------------------------------------------------------


def test_free_electron_groups_window():
    order, first, sizes = free_electron_groups(np.array([3.0, 1.0, 1.0 + 1e-9, 0.0, 3.0, 5.0]), 4)
    assert order.tolist() == [3, 1, 2, 0, 4, 5]
    assert first.tolist() == [0, 1, 3] and sizes.tolist() == [1, 2, 2]


def test_k_centred_basis_keeps_symmetry_at_w():
    # The basis |k+G| ≤ G_max is invariant under the little group of k, so W's doubly degenerate
    # levels come out exactly paired; the k-independent basis |G| ≤ G_max splits them slightly
    # (common practice, no source).
    si = bundled("silicon")
    points, _ = standard_path(si)
    path_model = build_model(si, 200.0)
    k = np.array(points["W"]) @ path_model.reciprocal_invA
    local = k_centred_model(si, 200.0, k)
    e_local = np.linalg.eigvalsh(local.hamiltonian(k))[:8]
    e_path = np.linalg.eigvalsh(path_model.hamiltonian(k))[:8]
    # W1, W2 single, W3 double in the O_h little group D2d (from memory): the lowest eight levels
    # of silicon at W come in pairs
    assert np.max(np.abs(e_local[0::2] - e_local[1::2])) < 1e-9
    assert np.max(np.abs(e_path[0::2] - e_path[1::2])) > 1e-7


def test_exact_levels_matched_by_sorted_position():
    si = bundled("silicon")
    points, _ = standard_path(si)
    p = examine_point(si, 150.0, np.array(points["L"]), "L", n_levels=8)
    local = k_centred_model(si, 150.0, p.k_cart_invA)
    w = np.linalg.eigvalsh(local.hamiltonian(p.k_cart_invA))
    for g in p.groups:
        assert g.exact_eV == pytest.approx(w[g.first_index:g.first_index + g.degeneracy],
                                           abs=1e-9)
        assert np.all((g.exact_weight >= 0) & (g.exact_weight <= 1 + 1e-12))
        assert g.first_order_error_eV == pytest.approx(g.first_order_eV - g.exact_eV)


def test_resolve_points():
    si = bundled("silicon")
    labels = [lab for lab, _, _ in resolve_points(si)]
    assert labels[0] == "Γ" and len(labels) == len(set(labels)) and "L" in labels
    (lab, k, kind), = resolve_points(si, [[0.5, 0.5, 0.5]])
    assert lab == "L" and kind == "labelled point"
    assert resolve_points(si, ["Gamma"])[0][0] == "Γ"
    assert resolve_points(si, [np.array([0.1, 0, 0])])[0][2] == "given point"
    with pytest.raises(InputError, match="points"):
        resolve_points(si, ["Q"])
    with pytest.raises(InputError, match="points"):
        resolve_points(si, [[0.5, 0.5]])


def test_point_syntax_is_parsed_by_the_command_line():
    # the library takes points as data; the text syntax belongs to the CLI
    assert parse_point("0.5, 0, 0.5") == [0.5, 0.0, 0.5]
    assert parse_point("0.1 0 0") == [0.1, 0.0, 0.0]
    assert parse_point("Gamma") == "Gamma" and parse_point("") == ""


# --------------------------------------------------------------------------------------------
# the command
# --------------------------------------------------------------------------------------------


def test_gaps_command_writes_json_and_figure(tmp_path):
    chain = MATERIALS / "cosine-chain.toml"
    json_path = tmp_path / "g.json"
    code, out, err = run(["gaps", str(chain), "--out", str(tmp_path), "--json", str(json_path),
                          "--k-points", "20"])
    assert code == 0, err
    assert (tmp_path / "cosine-chain-gaps.png").read_bytes().startswith(b"\x89PNG")
    assert "Γ" in out and "X" in out and "range" in out
    doc = json.loads(json_path.read_text(encoding="utf-8"))
    assert doc["command"] == "gaps"
    assert doc["settings"]["crossings"] is True
    res = doc["results"]
    assert [p["label"] for p in res["points"]] == ["Γ", "X"]
    x = res["points"][1]
    g = x["groups"][0]
    for key in ("first_order_eV", "second_order_eV", "exact_eV", "first_order_gaps_eV",
                "second_order_gaps_eV", "exact_gaps_eV", "couplings", "status", "gap_opens_at",
                "exact_weight", "uncoupled_reason"):
        assert key in g
    assert g["first_order_gaps_eV"][0] == pytest.approx(2.0, rel=1e-10)  # 2 V1, V1 = 1 eV
    assert g["couplings"][0]["reason"] == "coupled"
    assert g["couplings"][0]["value_eV"] == pytest.approx([1.0, 0.0])
    assert res["energy_zero"]["name"] == "model zero"


def test_gaps_command_points_and_errors(tmp_path):
    al = MATERIALS / "aluminium.toml"
    code, out, err = run(["gaps", str(al), "--out", str(tmp_path), "--point", "L", "--point",
                          "X", "--k-points", "10"])
    assert code == 0, err
    doc = json.loads((tmp_path / "aluminium-gaps.json").read_text(encoding="utf-8"))
    assert [p["label"] for p in doc["results"]["points"]] == ["L", "X"]  # no crossings
    assert doc["settings"]["crossings"] is False
    code, _, err = run(["gaps", str(al), "--out", str(tmp_path), "--point", "Q"])
    assert code == 2 and "--point" in err and "unknown point" in err
    assert not any(p.name.startswith(".") for p in tmp_path.iterdir())


def test_annotation_marks_exact_and_predicted_gaps():
    from bandpert.output.figures.gaps import EXACT_GAP_COLOUR, gap_figure
    from bandpert.physics.bands import compute_band_structure

    m = cosine_chain(0.5)
    bs = compute_band_structure(m, n_k=20, n_bands=4)
    report = gap_analysis(m, model=bs.model, n_bands=4, crossings=False)
    fig = gap_figure(bs, report)
    ax = fig.axes[0]
    bars = [ln.get_ydata() for ln in ax.lines if ln.get_color() == EXACT_GAP_COLOUR
            and ln.get_linewidth() > 2]
    g = group_at(point_named(report, "X"), 0)
    assert any(np.allclose(y, g.exact_eV - bs.energy_zero_eV) for y in bars)
    assert any(t.get_text() == f"{g.exact_gaps_eV[0]:.2f} ({g.second_order_gaps_eV[0]:.2f})"
               for t in ax.texts)


def test_continuous_form_factors_give_the_same_gaps_and_reasons():
    # The fitted continuous model equals the tabulated one at the reference lattice
    # (bandpert.planewave.formfactor), so the gap analysis must agree: germanium keeps its lowest
    # X pair degenerate because cos(G·τ) = 0 on |G|² = 4 (Cohen & Bergstresser, Phys. Rev. 141, 789
    # (1966), eq. 2: the structure factor of the diamond structure).
    from bandpert.input.material import parse_material, read_toml_document
    from bandpert.planewave.formfactor import continuous_document

    doc = read_toml_document(MATERIALS / "germanium.toml")
    tab = gap_analysis(parse_material(doc, "ge"))
    cont = gap_analysis(parse_material(continuous_document(doc, "ge"), "ge"))
    for p, q in zip(tab.points, cont.points, strict=True):
        assert p.label == q.label
        for g, h in zip(p.groups, q.groups, strict=True):
            assert g.uncoupled_reason == h.uncoupled_reason
            assert np.allclose(g.exact_eV, h.exact_eV, atol=1e-9)
            assert np.allclose(g.first_order_eV, h.first_order_eV, atol=1e-9)
