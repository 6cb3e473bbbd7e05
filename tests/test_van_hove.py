"""Van Hove critical points M0–M3 at the labelled points (bandpert.physics.van_hove)."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled, make_material

from bandpert.crystal.lattice import standard_path
from bandpert.physics import critical_points
from bandpert.physics.degenerate_edge import effective_hamiltonian_in_q
from bandpert.physics.mass_tensor import eigenstates
from bandpert.physics.van_hove import classify_levels, label_and_classify
from bandpert.planewave.model import build_k_centred_model, build_model
from bandpert.symmetry.labels import k_centred_states
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C

RY = 13.605693122994
CUTOFF = 7 * RY


def _classified(name: str, n_bands: int = 8, cutoff_eV: float = CUTOFF,
                points: tuple[str, ...] | None = None):
    m = bundled(name)
    path = standard_path(m)[0]
    chosen = {p: path[p] for p in (points or path)}
    labels, critical = label_and_classify(m, cutoff_eV, chosen, n_bands)
    return {ps.point: (ps, cp) for ps, cp in zip(labels, critical, strict=True)}


def _level(points, point: str, label: str, nth: int = 0):
    ps, cp = points[point]
    found = [c for lv, c in zip(ps.levels, cp.levels, strict=True) if lv.label == label]
    return found[nth]


def _finite_difference_hessian(w, v, kg, band, h=2.5e-4):
    """Central differences of E_band(k0 + q) in the fixed basis: H(k0+q) = H(k0) + C(|kg+q|² −
    |kg|²) on the diagonal, all stencil matrices in one batched eigvalsh."""
    h0 = (v * w) @ v.conj().T
    d = kg.shape[1]
    steps = [np.zeros(d)]
    for i in range(d):
        for j in range(d):
            for si in (1, -1):
                for sj in (1, -1):
                    q = np.zeros(d)
                    q[i] += si * h
                    q[j] += sj * h
                    steps.append(q)
    mats = np.repeat(h0[None], len(steps), axis=0)
    for n, q in enumerate(steps):
        mats[n][np.diag_indices(kg.shape[0])] += C * (2 * kg @ q + q @ q)
    e = np.linalg.eigvalsh(mats)[:, band]
    out = np.empty((d, d))
    n = 1
    for i in range(d):
        for j in range(d):
            pp, pm, mp, mm = e[n:n + 4]
            out[i, j] = (pp - pm - mp + mm) / (4 * h * h)
            n += 4
    return out


@pytest.mark.parametrize("name,k_frac,bands", [
    ("silicon", (0.5, 0.5, 0.5), (0, 1, 4)),          # L2′, L1, L1: non-degenerate at L
    ("gallium-arsenide", (0.11, 0.23, 0.37), (0, 1, 2, 3, 4)),  # a general point
])
def test_sum_over_states_hessian_equals_finite_differences(name, k_frac, bands):
    # In a fixed plane-wave basis H(k0+q) is exactly quadratic in q, so the second-order sum
    # over every state of the basis is the exact Hessian of each non-degenerate band
    # (source: Kittel, Quantum Theory of Solids, 1963, ch. 9); checked against central
    # differences of the band itself (common practice, no source).
    m = bundled(name)
    model = build_k_centred_model(m, 5 * RY)
    k = np.array(k_frac) @ model.reciprocal_invA
    miller, w, v = k_centred_states(model, k)
    kg = k + miller @ model.reciprocal_invA
    levels = classify_levels(w, v, kg, [(b, 1) for b in bands])
    for b, lv in zip(bands, levels, strict=True):
        fd = _finite_difference_hessian(w, v, kg, b)
        assert np.abs(lv.hessian_eV_A2 - fd).max() < 1e-4 * np.abs(fd).max(), b


def test_empty_lattice_hessian_is_exactly_twice_c():
    # V = 0: E = ħ²|k+G|²/2m0 exactly, ∂²E/∂k_i∂k_j = 2C δ_ij, a minimum (M0) at Γ for the
    # lowest band (exact solution; common practice, no source)
    m = make_material({"type": "fcc", "a_A": 4.05},
                      [{"species": "Al", "position": [0.0, 0.0, 0.0]}], {"form": "empty"})
    labels, critical = label_and_classify(m, 60.0, {"Γ": np.zeros(3)}, 1)
    lv = critical[0].levels[0]
    assert lv.method == "hessian"
    assert np.allclose(lv.hessian_eV_A2, 2 * C * np.eye(3), atol=1e-12)
    assert lv.bands[0].van_hove == "M0"


def test_aluminium_bottom_is_a_free_electron_like_minimum():
    # Aluminium's lowest band at Γ is nearly free-electron-like: a minimum with m* close to m0
    # (Ashcroft & Mermin, Solid State Physics, 1976, ch. 9 and Fig. 15.4 — from memory)
    pts = _classified("aluminium", 4, points=("Γ",))
    lv = pts["Γ"][1].levels[0]
    assert lv.bands[0].van_hove == "M0"
    assert np.allclose(lv.bands[0].principal_m0_over_mstar, 1.0, atol=0.15)


def test_silicon_levels_at_gamma_x_l():
    pts = _classified("silicon", points=("Γ", "X", "L"))
    # The valence-band bottom Γ1 is a minimum (source: Cohen & Bergstresser, Phys. Rev. 141,
    # 789 (1966), Fig. 2), isotropic by cubic symmetry (common practice, no source)
    g1 = _level(pts, "Γ", "Γ1")
    assert g1.method == "hessian" and g1.bands[0].van_hove == "M0"
    w = g1.bands[0].principal_m0_over_mstar
    assert np.ptp(w) < 1e-9 * abs(w).max() and g1.symmetry_residual < 1e-9
    # Γ25′ is a triplet: no band of it has a Hessian; its second-order block curves down along
    # every direction for all three bands (the warped heavy and light holes: Dresselhaus, Kip &
    # Kittel, Phys. Rev. 98, 368 (1955))
    g25 = _level(pts, "Γ", "Γ25′")
    assert g25.degeneracy == 3 and g25.hessian_eV_A2 is None
    assert g25.method == "degenerate block"
    assert [b.van_hove for b in g25.bands] == ["M3"] * 3
    # X1 of diamond is a pair that splits linearly along Δ: a crossing, no critical point
    # (source: Herring, J. Franklin Inst. 233, 525 (1942): every X irrep of the diamond group
    # is two-dimensional and Δ1/Δ2′ split linearly)
    x1 = _level(pts, "X", "X1")
    assert x1.method == "crossing" and x1.linear_splitting_eV_A > 0.1
    assert all(b.van_hove is None for b in x1.bands)
    # L3′, the valence pair at L: curves up along [111] and down across it (masses:
    # m0/m* +0.52 along [111]); classified by the degenerate block as index 2 for both bands
    # (two positive caps around ±[111], one negative band), no Hessian, no principal axes
    l3 = _level(pts, "L", "L3′")
    assert [b.van_hove for b in l3.bands] == ["M2", "M2"]
    for b in l3.bands:
        lo, hi = b.curvature_range_m0_over_mstar
        assert lo < 0 < hi and b.principal_m0_over_mstar is None
    assert abs(l3.bands[0].curvature_range_m0_over_mstar[1] - 0.52) < 0.02  # along [111]
    # Γ15 (conduction triplet of Si): its lowest band curves down in 4 regions of directions
    # and up in 8: no quadratic form has that pattern, a warped saddle without index
    g15 = _level(pts, "Γ", "Γ15")
    assert g15.bands[0].kind == "saddle" and g15.bands[0].saddle_index is None


def test_non_degenerate_hessians_respect_the_little_group():
    # Uniaxial at X and L, isotropic at Γ (common practice, no source): two principal values
    # equal for the non-degenerate GaAs X1, X3 and silicon L1, L2′; the symmetrised Hessian
    # equals the computed one to rounding.
    for name, point in (("gallium-arsenide", "X"), ("silicon", "L")):
        pts = _classified(name, points=(point,))
        for lv in pts[point][1].levels:
            if lv.method != "hessian":
                continue
            w = lv.bands[0].principal_m0_over_mstar
            assert min(abs(w[1] - w[0]), abs(w[2] - w[1])) < 1e-8 * abs(w).max()
            assert lv.symmetry_residual < 1e-9


def test_fcc_k_point_levels_are_not_stationary():
    # K lies on mirror planes only (little co-group mm2, a polar group): the gradient along the
    # C2 axis [110] need not vanish (common practice, no source), so no level there is a van
    # Hove point
    pts = _classified("silicon", points=("K",))
    assert {b.kind for lv in pts["K"][1].levels for b in lv.bands} == {"not stationary"}


def test_gallium_arsenide_x_conduction_band_is_a_saddle():
    # GaAs band 5 at X (X1 conduction, anion at the origin) curves down toward Γ: the camel's
    # back of this model (``masses`` finds the nearest minimum along Δ); index 1
    pts = _classified("gallium-arsenide", points=("X",))
    band5 = [b for lv in pts["X"][1].levels for b in lv.bands if b.band == 4][0]
    assert band5.kind == "saddle" and band5.van_hove == "M1"


@pytest.mark.parametrize("name", ["silicon", "germanium", "gallium-arsenide", "aluminium"])
def test_agrees_with_masses_at_every_labelled_point(name, monkeypatch):
    # The van Hove type of every band at every labelled point of the default path equals the
    # classification ``masses`` makes (bandpert.physics.critical_points.classify, with the
    # Löwdin curvatures of the run's basis for a degenerate set): kind and saddle index. The
    # nearest-extremum search of ``classify`` does not change the kind and is skipped here.
    # 5 Ry keeps the test fast; aluminium's small cell takes its default cutoff (at 5 Ry its
    # X pair 7–8 sits so close to another level that the run's Γ-centred basis, which breaks
    # the symmetry at X, and the centred one disagree on one curvature's sign)
    cutoff = 190.0 if name == "aluminium" else 5 * RY
    m = bundled(name)
    path = standard_path(m)[0]
    points = {p: path[p] for p in ("Γ", "X", "L", "W", "K")}
    labels, critical = label_and_classify(m, cutoff, points, 8)
    model = build_model(m, cutoff)
    monkeypatch.setattr(critical_points, "nearest_extremum", lambda *a, **k: None)
    cache = {}
    centred = critical_points.centred_model

    def cached(material, k, cut):
        key = (tuple(np.round(k, 12)), cut)
        if key not in cache:
            cache[key] = centred(material, k, cut)
        return cache[key]

    monkeypatch.setattr(critical_points, "centred_model", cached)
    compared = warped = 0
    for ps, cp in zip(labels, critical, strict=True):
        k = ps.k_frac @ model.reciprocal_invA
        states = eigenstates(model, k)

        def set_curvature(group, u, states=states):
            h = effective_hamiltonian_in_q(states, group, u)
            return np.linalg.eigvalsh(h - states.energies_eV[group[0]] * np.eye(group.size)) / C

        for lv in cp.levels:
            for b in lv.bands:
                ref = critical_points.classify(m, model, k, b.band, set_curvature=set_curvature)
                assert ref.degenerate_bands.size == lv.degeneracy, (ps.point, b.band)
                assert ref.kind == b.kind, (ps.point, b.band, ref.kind, b.kind)
                # the index (None for a warped saddle), from the Löwdin curvatures of the run's
                # Γ-centred basis there and of the k-centred basis here
                if ref.kind != "crossing":
                    assert ref.saddle_index == b.saddle_index, (ps.point, b.band)
                warped += ref.kind == "saddle" and ref.saddle_index is None
                compared += 1
    assert compared >= 30
    print(name, compared, "bands compared,", warped, "warped saddles")


def test_figure_marks_every_classified_level_and_names_the_types(tmp_path):
    # ``bands --van-hove-marks``: one marker per (level, type) at the labelled points inside the
    # window, a legend naming the types drawn, no overlapping or clipped text
    from figure_cases import bands_van_hove, text_problems
    from matplotlib.lines import Line2D

    m = bundled("gallium-arsenide")
    fig = bands_van_hove(m, n_k=20)
    ax = fig.axes[0]
    marks = [ln for ln in ax.get_lines() if ln.get_marker() in ("^", ">", "<", "v", "D", "x")
             and len(ln.get_xdata()) == 1]
    lo, hi = ax.get_ylim()
    assert len(marks) >= 20
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "M0 minimum" in legend and "M1 saddle" in legend and "M3 maximum" in legend
    assert all(isinstance(h, Line2D) for h in ax.get_legend().legend_handles)
    assert lo < min(ln.get_ydata()[0] for ln in marks)
    assert text_problems(fig) == []
    from test_cli import run

    code, out, err = run(["bands", "silicon", "--k-points", "12", "--exact-only",
                          "--van-hove-marks", "--out", str(tmp_path)])
    assert code == 0, err
    assert "[M0]" in out and "[crossing]" in out
