"""Compatibility relations along Δ and Λ, checked on silicon's computed bands."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled

from bandpert.crystal.lattice import standard_path
from bandpert.symmetry import label_points

RY = 13.605693122994

# source: Bouckaert, Smoluchowski & Wigner, Phys. Rev. 50, 58 (1936), compatibility tables for
# Γ–Δ and Γ–Λ; Herring, J. Franklin Inst. 233, 525 (1942) for diamond's X and L; restated in
# Yu & Cardona, Fundamentals of Semiconductors (2010), §2.3 (from memory)
GAMMA_DELTA = {"Γ1": {"Δ1"}, "Γ25′": {"Δ2′", "Δ5"}, "Γ15": {"Δ1", "Δ5"}, "Γ2′": {"Δ2′"}}
X_DELTA = {"X1": {"Δ1", "Δ2′"}, "X4": {"Δ5"}}
GAMMA_LAMBDA = {"Γ1": {"Λ1"}, "Γ25′": {"Λ1", "Λ3"}, "Γ15": {"Λ1", "Λ3"}, "Γ2′": {"Λ1"}}
L_LAMBDA = {"L1": {"Λ1"}, "L2′": {"Λ1"}, "L3": {"Λ3"}, "L3′": {"Λ3"}}


@pytest.fixture(scope="module")
def silicon_labels():
    si = bundled("silicon")
    pts = standard_path(si)[0]
    x, lpt = np.array(pts["X"]), np.array(pts["L"])
    points = {"Γ": np.zeros(3), "X": x, "L": lpt, "Δ near Γ": 0.08 * x, "Δ near X": 0.92 * x,
              "Λ near Γ": 0.08 * lpt, "Λ near L": 0.92 * lpt}
    return {p.point: p for p in label_points(si, 7 * RY, points, 8)}


@pytest.mark.parametrize("end,line,table", [("Γ", "Δ near Γ", GAMMA_DELTA),
                                            ("X", "Δ near X", X_DELTA),
                                            ("Γ", "Λ near Γ", GAMMA_LAMBDA),
                                            ("L", "Λ near L", L_LAMBDA)])
def test_levels_near_an_end_carry_the_compatible_labels(silicon_labels, end, line, table):
    # each level at the end point splits, a little way along the line, into the bands whose
    # labels the compatibility table names (the bands keep their order so close to the end)
    at_end, on_line = silicon_labels[end], silicon_labels[line]
    line_bands = on_line.band_labels
    checked = 0
    for lv in at_end.levels:
        if lv.first_band + lv.degeneracy > len(line_bands) or lv.label not in table:
            continue
        got = set(line_bands[lv.first_band:lv.first_band + lv.degeneracy])
        assert got == table[lv.label], (end, lv.label, got)
        checked += 1
    assert checked >= 3


def test_dimensions_add_up_along_the_lines(silicon_labels):
    # a three-dimensional Γ level gives a one- and a two-dimensional level on Δ and on Λ
    for line in ("Δ near Γ", "Λ near Γ"):
        degs = [lv.degeneracy for lv in silicon_labels[line].levels]
        assert degs[:3] == [1, 1, 2]
