"""Van Hove types of spin–orbit and nonlocal plane-wave models (bandpert.physics.van_hove).

∂H/∂k and ∂²H/∂k∂k are matrix differences of the model's own H(k) on the basis centred on the
point (bandpert.physics.hamiltonian_derivatives); Kramers pairs count as one level.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from conftest import bundled

from bandpert.crystal.lattice import reciprocal_vectors, standard_path
from bandpert.physics.kp_from_planewave import spin_orbit_valence_top
from bandpert.physics.van_hove import K_LINEAR_NOTE, classify_k_dependent, label_and_classify
from bandpert.planewave.model import centred_model
from bandpert.planewave.solver import exact_energies
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C

RY = 13.605693122994
#: Identities that hold at any basis size are checked on a small one (fast).
SMALL_CUTOFF_EV = 5 * RY


def _points(name: str, labels: tuple[str, ...], cutoff_eV: float | None = None,
            material=None, n_bands: int = 16):
    m = bundled(name) if material is None else material
    path = standard_path(m)[0]
    lab, crit = label_and_classify(m, cutoff_eV or m.cutoff_eV, {p: path[p] for p in labels},
                                   n_bands)
    return {ps.point: (ps, cp) for ps, cp in zip(lab, crit, strict=True)}


@pytest.fixture(scope="module")
def fitted():
    return {name: _points(name, ("Γ", "L")) for name in
            ("silicon-fitted", "germanium-fitted", "gallium-arsenide-fitted")}


def _level(points, point: str, first_band: int):
    return next(c for c in points[point][1].levels if c.first_band == first_band)


@pytest.mark.parametrize("name", ["silicon-fitted", "germanium-fitted"])
def test_gamma8_valence_top_is_a_maximum(fitted, name):
    # source: common practice, no source: the valence top of Si and Ge is the fourfold Γ8 at Γ,
    # a maximum of heavy and light holes (warped, so classified by its block: every curvature
    # of every band negative)
    top = bundled(name).valence_electrons - 4  # spinor bands hold one electron each
    level = _level(fitted[name], "Γ", top)
    assert level.degeneracy == 4 and level.method == "degenerate block"
    assert level.gradient_eV_A < 1e-6 and level.linear_splitting_eV_A < 1e-6
    for band in level.bands:
        assert band.kind == "maximum" and band.van_hove == "M3"
        assert band.curvature_range_m0_over_mstar[1] < 0
    # heavy and light holes: two Kramers-degenerate pairs of curvatures
    lo = [b.curvature_range_m0_over_mstar for b in level.bands]
    assert np.allclose(lo[0], lo[1], rtol=1e-8) and np.allclose(lo[2], lo[3], rtol=1e-8)
    assert not np.allclose(lo[0], lo[2], rtol=1e-2)


@pytest.mark.parametrize("name", ["silicon-fitted", "germanium-fitted"])
def test_centrosymmetric_levels_are_kramers_pairs(fitted, name):
    # source: common practice, no source (Kramers' theorem with inversion: E_↑(k) = E_↓(k) at
    # every k): every level at least twofold; a twofold level is one band carried twice, with
    # one Hessian for both bands
    for point in ("Γ", "L"):
        ps, cp = fitted[name][point]
        assert ps.levels and all(lv.degeneracy % 2 == 0 for lv in ps.levels)
        assert cp.note == ""
        for level in cp.levels:  # (a kink of H(k) leaves no Hessian: tested below)
            if level.degeneracy == 2 and level.method != "non-analytic":
                assert level.method == "hessian"
                a, b = level.bands
                assert a.van_hove == b.van_hove
                assert np.array_equal(a.principal_m0_over_mstar, b.principal_m0_over_mstar)


def test_germanium_l6_conduction_minimum(fitted):
    # source: Ge's conduction minimum is at L (Yu & Cardona, Fundamentals of Semiconductors,
    # from memory): the lowest conduction pair at L is M0, heavy along [111] and light across
    m = bundled("germanium-fitted")
    level = _level(fitted["germanium-fitted"], "L", m.valence_electrons)
    assert level.method == "hessian" and level.summary == "M0"
    w = level.bands[0].principal_m0_over_mstar
    assert np.all(w > 0) and w[2] / w[0] > 5  # m_l / m_t
    # the longitudinal axis is [111] (L = (½,½,½) in the fcc reciprocal fractions)
    axis = np.linalg.eigh(level.hessian_eV_A2)[1][:, 0]
    assert abs(abs(axis @ np.ones(3)) / np.sqrt(3) - 1) < 1e-8
    assert level.symmetry_residual < 1e-6


def test_gaas_gamma6_conduction_mass_equals_the_masses_path(fitted):
    # source: exact identity up to the O(h²) of masses' second differences: the Γ6 pair's one
    # Hessian is isotropic and equals the curvature `bandpert masses` prints (Kramers-pair
    # averages of E(±h) − 2E(0) along [100] and [111])
    m = bundled("gallium-arsenide-fitted")
    level = _level(fitted["gallium-arsenide-fitted"], "Γ", m.valence_electrons)
    assert level.degeneracy == 2 and level.method == "hessian" and level.summary == "M0"
    w = level.bands[0].principal_m0_over_mstar
    assert np.ptp(w) < 1e-8 * w[0]
    mass = spin_orbit_valence_top(m, m.cutoff_eV).conduction_m0
    assert abs(1.0 / w.mean() / mass - 1.0) < 1e-3


def test_zincblende_linear_spin_splitting_is_a_crossing(fitted):
    # source: G. Dresselhaus, Phys. Rev. 100, 580 (1955) (from memory): without inversion the
    # spin degeneracy is lifted linearly in k away from some time-reversal-invariant points,
    # and only cubically from Γ6. Checked on the exact bands: the splitting of GaAs's lowest
    # conduction pair at L doubles with q (linear; listed as a crossing), at Γ it grows 8-fold
    # (cubic; one Hessian)
    name = "gallium-arsenide-fitted"
    m = bundled(name)
    c = m.valence_electrons
    gamma, ell = _level(fitted[name], "Γ", c), _level(fitted[name], "L", c)
    assert ell.method == "crossing" and ell.linear_splitting_eV_A > 1e-3
    assert gamma.method == "hessian" and gamma.linear_splitting_eV_A < 1e-9
    assert fitted[name]["L"][1].note == K_LINEAR_NOTE
    b = reciprocal_vectors(m.vectors_A)
    u = np.array([1.0, -1.0, 0.0]) / np.sqrt(2)  # ⊥ Λ
    for point, k_frac, power in (("L", (0.5, 0.5, 0.5), 1), ("Γ", (0, 0, 0), 3)):
        k0 = np.asarray(k_frac) @ b
        model = centred_model(m, m.cutoff_eV, k0, spin_orbit=True)
        q = 0.01
        e = exact_energies(model, np.array([k0 + q * u, k0 + 2 * q * u]), c + 2)
        split = e[:, c + 1] - e[:, c]
        assert abs(np.log2(split[1] / split[0]) - power) < 0.05, point


def _pair_average_hessian(model, k0, band, h=2.5e-4):
    """Central differences of the mean of bands ``band``, ``band + 1`` (a Kramers pair)."""
    eye = np.eye(3) * h
    steps = [np.zeros(3)] + [si * eye[i] + sj * eye[j] for i in range(3) for j in range(3)
                             for si in (1, -1) for sj in (1, -1)]
    e = exact_energies(model, k0 + np.array(steps), band + 2)
    mean = e[:, band:band + 2].mean(axis=1)
    out = np.empty((3, 3))
    for n, (i, j) in enumerate((i, j) for i in range(3) for j in range(3)):
        pp, pm, mp, mm = mean[1 + 4 * n:5 + 4 * n]
        out[i, j] = (pp - pm - mp + mm) / (4 * h * h)
    return out


@pytest.mark.parametrize("name,k_frac,band,spinless", [
    ("germanium-fitted", (0.5, 0.5, 0.5), 8, False),        # L6 conduction pair
    ("gallium-arsenide-fitted", (0, 0, 0), 8, False),       # Γ6 conduction pair
    ("gallium-arsenide-fitted", (0.11, 0.23, 0.37), 6, False),  # a general point: single bands
    ("silicon-fitted", (0.5, 0.5, 0.5), 4, True),           # nonlocal wells alone: L1 conduction
])
def test_hessian_equals_finite_differences_of_exact_bands(name, k_frac, band, spinless):
    # source: exact identity (the second-order sum over every state of the fixed basis is the
    # band's curvature there); the differences carry an O(h²) error, ~1e-5 relative at h =
    # 2.5e-4 Å⁻¹. Kramers pairs are compared through their mean, analytic at the point
    m = bundled(name).without_spin_orbit() if spinless else bundled(name)
    k0 = np.asarray(k_frac, dtype=float) @ reciprocal_vectors(m.vectors_A)
    model = centred_model(m, m.cutoff_eV, k0, spin_orbit=True)
    pair = not spinless and k_frac[0] != 0.11  # Kramers pairs at L and Γ
    levels = ([(band, 2)] if pair else [(band, 1)] if spinless
              else [(band, 1), (band + 1, 1)])
    out = classify_k_dependent(m, m.cutoff_eV, k0, levels)
    assert all(level.method == "hessian" for level in out)
    reference = ([_pair_average_hessian(model, k0, band)] if pair
                 else [_single_band_hessian(model, k0, a) for a, _ in levels])
    for level, fd in zip(out, reference, strict=True):
        assert np.max(np.abs(level.hessian_eV_A2 - fd)) < 1e-4 * np.max(np.abs(fd))


def _single_band_hessian(model, k0, band, h=2.5e-4):
    eye = np.eye(3) * h
    steps = [si * eye[i] + sj * eye[j] for i in range(3) for j in range(3)
             for si in (1, -1) for sj in (1, -1)]
    e = exact_energies(model, k0 + np.array(steps), band + 1)[:, band]
    return np.array([(e[4 * n] - e[4 * n + 1] - e[4 * n + 2] + e[4 * n + 3]) / (4 * h * h)
                     for n in range(9)]).reshape(3, 3)


def _zero_strength(material):
    so = material.spin_orbit
    return replace(material, spin_orbit=replace(so, species={
        s: replace(p, strength_eV=0.0) for s, p in so.species.items()}))


@pytest.mark.parametrize("name", ["silicon-spin-orbit", "gallium-arsenide-spin-orbit"])
def test_zero_strength_is_the_spinless_classification(name):
    # source: exact identity: with λ_so = 0, H(k) = H_spinless(k) ⊗ 1₂, so every spinless level
    # (first band a, degeneracy g) is the spinor level (2a, 2g), the sums over states coincide
    # (the other spin couples to nothing), a non-degenerate band becomes one Kramers pair with
    # the same Hessian, a degenerate one the same block twice
    m = bundled(name)
    labels = ("Γ", "X", "L", "W", "K")
    spinor = _points(name, labels, SMALL_CUTOFF_EV, _zero_strength(m), 16)
    spinless = _points(name, labels, SMALL_CUTOFF_EV, m.without_spin_orbit(), 8)
    compared = 0
    for point in labels:
        one = {c.first_band: c for c in spinless[point][1].levels}
        two = {c.first_band: c for c in spinor[point][1].levels}
        assert len(one) == len(two)
        for a, c1 in one.items():
            c2 = two[2 * a]
            assert c2.degeneracy == 2 * c1.degeneracy
            assert c2.method == c1.method and c2.summary == c1.summary
            kinds = [b.kind for b in c1.bands]
            assert [b.kind for b in c2.bands] == [k for k in kinds for _ in (0, 1)]
            if c1.hessian_eV_A2 is not None:
                scale = np.max(np.abs(c1.hessian_eV_A2))
                assert np.max(np.abs(c2.hessian_eV_A2 - c1.hessian_eV_A2)) < 1e-6 * scale
                compared += 1
            elif c1.method == "degenerate block":
                r1 = np.array([b.curvature_range_m0_over_mstar for b in c1.bands])
                r2 = np.array([b.curvature_range_m0_over_mstar for b in c2.bands])
                assert np.allclose(r2[0::2], r1, rtol=1e-6, atol=1e-9)
                assert np.allclose(r2[1::2], r1, rtol=1e-6, atol=1e-9)
    assert compared >= 10


def test_curvature_signs_of_the_spinor_block_follow_the_hessian_units():
    # source: exact identity: m0/m* = (1/2C) ∂²E/∂k² (CONVENTIONS.md, "Masses"); the Γ6 pair's
    # principal values are the Hessian's eigenvalues over 2C
    m = bundled("gallium-arsenide-fitted")
    out = classify_k_dependent(m, m.cutoff_eV, np.zeros(3), [(m.valence_electrons, 2)])[0]
    assert np.allclose(out.bands[0].principal_m0_over_mstar,
                       np.linalg.eigvalsh(out.hessian_eV_A2) / (2 * C), rtol=1e-12)


@pytest.mark.parametrize("kink", [False, True])
def test_a_kink_of_h_makes_the_level_non_analytic(kink, monkeypatch):
    # source: exact identity: a well depth s√(E⁰(K)E⁰(K′)) ∝ |k|·|k + G′| between the plane
    # wave G = 0 and the others (an energy-dependent depth once tried, DEVELOPERS.md) is not
    # differentiable at Γ: the bottom valence level (its G = 0 component is largest) becomes a
    # cone, E(2q) − E(0) = 2[E(q) − E(0)] on the exact bands, and gets no Hessian; without it
    # the level is a smooth minimum (ratio 4). The term is added here to the model's wells.
    from dataclasses import replace

    from bandpert.planewave import nonlocal_term as wells
    from bandpert.units import HBAR2_OVER_2M0_EV_A2

    original = wells.NonlocalTerm.matrix

    def with_cone(self, kg, structure):
        unit = replace(self, channels=tuple(((0, 1.0, 1.06),) for _ in self.channels))
        k = np.linalg.norm(kg, axis=1)
        return (original(self, kg, structure) - 0.3 * HBAR2_OVER_2M0_EV_A2 * np.outer(k, k)
                * original(unit, kg, structure))

    if kink:
        monkeypatch.setattr(wells.NonlocalTerm, "matrix", with_cone)
    m = bundled("silicon-fitted")
    level = classify_k_dependent(m, SMALL_CUTOFF_EV, np.zeros(3), [(0, 2)])[0]
    model = centred_model(m, SMALL_CUTOFF_EV, np.zeros(3), spin_orbit=True)
    q = 1e-3 * 2 * np.pi / m.a_A * np.array([1.0, 1.0, 0.0]) / np.sqrt(2)
    e = exact_energies(model, np.array([np.zeros(3), q, 2 * q]), 2)[:, 0]
    ratio = (e[2] - e[0]) / (e[1] - e[0])
    if kink:
        assert level.method == "non-analytic" and level.hessian_eV_A2 is None
        assert [b.kind for b in level.bands] == ["non-analytic"] * 2
        assert abs(ratio - 2) < 0.05
    else:
        assert level.method == "hessian" and level.summary == "M0"
        assert abs(ratio - 4) < 0.05
