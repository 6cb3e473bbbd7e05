"""Time reversal in the labels: the partner irrep at −k, Herring's test for spinors, and
zincblende's X2/X4 names (bandpert.symmetry)."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled

from bandpert.crystal.lattice import standard_path
from bandpert.planewave.model import build_k_centred_model
from bandpert.symmetry import label_point, little_group, space_group_frame
from bandpert.symmetry.labels import k_centred_states, plane_wave_characters

RY = 13.605693122994
CUTOFF = 5 * RY


def _level_characters(m, model, frame, k_frac, n_states=16):
    """Per level: (energy, {operation index: character traced on its eigenvectors})."""
    group = little_group(frame, k_frac)
    miller, w, v = k_centred_states(model, k_frac @ model.reciprocal_invA, n_states)
    diag = plane_wave_characters(frame, group, miller, v)
    starts = np.concatenate([[0], np.flatnonzero(np.diff(w) > 1e-5) + 1])
    out = []
    for a, b in zip(starts[:-1], starts[1:], strict=True):
        chi = diag[:, a:b].sum(axis=1)
        out.append((float(w[a:b].mean()), dict(zip(group.indices.tolist(), chi, strict=True))))
    return group, out


@pytest.mark.parametrize("k_frac", [(0.3, 0.0, 0.3), (0.12, 0.27, 0.39)])
def test_levels_at_minus_k_carry_the_complex_conjugate_irrep(k_frac):
    # Time reversal maps ψ_k to ψ_k* at −k, and every g of the little group commutes with
    # complex conjugation, so D_{−k}(g) = D_k(g)*: the level at −k carries the complex-conjugate
    # irrep (source: Bradley & Cracknell, The Mathematical Theory of Symmetry in Solids, 1972,
    # §7.1; Herring, Phys. Rev. 52, 361 (1937) — from memory). Silicon on Δ (−k ≢ k): the
    # nonsymmorphic operations make the characters complex, so the check can fail.
    m = bundled("silicon")
    model = build_k_centred_model(m, CUTOFF)
    frame = space_group_frame(m)
    k = np.array(k_frac)
    group_k, at_k = _level_characters(m, model, frame, k)
    group_mk, at_mk = _level_characters(m, model, frame, -k)
    assert sorted(group_k.indices.tolist()) == sorted(group_mk.indices.tolist())
    complex_seen = 0.0
    for (e1, c1), (e2, c2) in zip(at_k, at_mk, strict=True):
        assert abs(e1 - e2) < 1e-8
        for op, chi in c1.items():
            assert abs(c2[op] - np.conj(chi)) < 1e-8
            complex_seen = max(complex_seen, abs(chi.imag))
    if group_k.order > 1:
        assert complex_seen > 0.1
    # the labels: each level's irrep at −k has the conjugate characters of the irrep at k
    a = label_point(m, CUTOFF, k, "k", 8, frame=frame, model=model)
    b = label_point(m, CUTOFF, -k, "-k", 8, frame=frame, model=model)
    col_k = {op: i for i, op in enumerate(group_k.indices.tolist())}
    col_mk = {op: i for i, op in enumerate(group_mk.indices.tolist())}
    ops = list(col_k)
    for la, lb in zip(a.levels, b.levels, strict=True):
        for ia, ib in zip(la.irreps, lb.irreps, strict=True):
            ca = group_k.characters[ia, [col_k[o] for o in ops]]
            cb = group_mk.characters[ib, [col_mk[o] for o in ops]]
            assert np.allclose(cb, np.conj(ca), atol=1e-6)


def test_herring_spinor_test_at_gamma_of_gallium_arsenide():
    # Double group of T_d at Γ: Γ6, Γ7 (2D) and Γ8 (4D) are all of Herring's case (a): time
    # reversal adds no degeneracy (source: Koster, Dimmock, Wheeler & Statz, Properties of the
    # Thirty-Two Point Groups, 1963, T_d table, time-reversal column — from memory)
    m = bundled("gallium-arsenide-spin-orbit")
    ps = label_point(m, CUTOFF, np.zeros(3), "Γ", 8)
    by_name = dict(zip(ps.irrep_names, ps.herring, strict=True))
    assert by_name == {"Γ6": 1, "Γ7": 1, "Γ8": 1}
    assert not any(lv.accidental or lv.time_reversal for lv in ps.levels)


@pytest.mark.parametrize("name", ["gallium-arsenide-spin-orbit", "silicon-spin-orbit"])
def test_herring_spinor_test_sticks_the_l45_pair(name):
    # At L the double group of C_3v (zincblende) and D_3d (diamond) has two one-dimensional
    # irreps L4, L5 (L4±, L5± with inversion) that are complex conjugates: Herring's case (b),
    # so time reversal sticks them into the two-fold level "L4,5" (the valence pair L3 splits
    # by spin–orbit into L4,5 and L6); the two-dimensional L6 is case (a) (source: Dresselhaus,
    # Phys. Rev. 100, 580 (1955) and Yu & Cardona, Fundamentals of Semiconductors, 2010,
    # §2.3 — from memory)
    m = bundled(name)
    k = np.array(standard_path(m)[0]["L"])
    ps = label_point(m, CUTOFF, k, "L", 8)
    one_d = [h for h, d in zip(ps.herring, ps.irrep_dimensions, strict=True) if d == 1]
    two_d = [h for h, d in zip(ps.herring, ps.irrep_dimensions, strict=True) if d == 2]
    assert one_d and set(one_d) == {0}
    assert two_d and set(two_d) == {1}
    pairs = [lv for lv in ps.levels if len(lv.irreps) == 2]
    assert pairs and all(lv.time_reversal and not lv.accidental for lv in pairs)
    assert all(lv.degeneracy == 2 for lv in ps.levels)  # Kramers: every level at least 2


def _op_characters(frame, group, irrep, k_cart):
    """Characters of one irrep on the S4 about k and on the C2 about a cubic axis ⊥ k."""
    rot = frame.rotations_cart[group.indices]
    kh = k_cart / np.linalg.norm(k_cart)
    out = {}
    for j, r in enumerate(rot):
        det, tr = np.linalg.det(r), np.trace(r)
        if np.isclose(det, -1) and np.isclose(tr, -1) and np.allclose(r @ kh, -kh):
            out.setdefault("S4", group.characters[irrep, j])
        if np.isclose(det, 1) and np.isclose(tr, -1) and np.allclose(r @ kh, -kh):
            out.setdefault("C2perp", group.characters[irrep, j])
    return out


def test_zincblende_x2_and_x4_are_in_reach_and_named_by_their_characters():
    # The bundled GaAs has X2 and X4 among its X levels (bands 9 and 14, 11 and 13 eV above the
    # valence top, beyond the published tables of the empirical-pseudopotential bands).
    # Names in the zincblende notation, anion at the origin, D_2d character table with
    # X2 = B1 (S4 about k: −1; C2 about a cubic axis ⊥ k: +1) and X4 = A2 (S4 +1, C2⊥ −1)
    # (source: Yu & Cardona, Fundamentals of Semiconductors, 4th ed. 2010, ch. 2, the D_2d
    # character table of X; Parmenter, Phys. Rev. 100, 573 (1955) — from memory)
    m = bundled("gallium-arsenide")
    k = np.array(standard_path(m)[0]["X"])
    ps = label_point(m, 7 * RY, k, "X", 14)
    labels = [lv.label for lv in ps.levels]
    assert labels[:6] == ["X1", "X3", "X5", "X1", "X3", "X5"]
    assert "X2" in labels and "X4" in labels
    assert labels.index("X2") < labels.index("X4")
    frame = space_group_frame(m)
    group = little_group(frame, k)
    k_cart = k @ build_k_centred_model(m, 7 * RY).reciprocal_invA
    x2 = _op_characters(frame, group, ps.irrep_names.index("X2"), k_cart)
    x4 = _op_characters(frame, group, ps.irrep_names.index("X4"), k_cart)
    assert np.isclose(x2["S4"], -1) and np.isclose(x2["C2perp"], 1)
    assert np.isclose(x4["S4"], 1) and np.isclose(x4["C2perp"], -1)
    # X2 and X4 are one-dimensional and each level holding them is single
    for lv in ps.levels:
        if lv.label in ("X2", "X4"):
            assert lv.degeneracy == 1
