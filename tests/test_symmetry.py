"""Irreducible-representation labels of the plane-wave levels (bandpert.symmetry)."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import MATERIALS, bundled, make_material
from test_cli import run

from bandpert.crystal.lattice import standard_path
from bandpert.symmetry import NO_SYMMETRY, label_point, little_group, space_group_frame

RY = 13.605693122994  # eV; the labels below do not depend on the cutoff (tested)
CUTOFF = 7 * RY


def labels(name: str, point: str, n: int, cutoff_eV: float = CUTOFF, **kw) -> list[str]:
    m = bundled(name)
    k = np.array(standard_path(m)[0][point])
    ps = label_point(m, cutoff_eV, k, point, n, **kw)
    return [lv.label for lv in ps.levels]


def test_silicon_labels_at_gamma_x_l():
    # source: Cohen & Bergstresser, Phys. Rev. 141, 789 (1966), Fig. 2 / Table III labels of Si
    # (origin at the bond centre): Γ1, Γ25′, Γ15, Γ2′; X1, X4, X1; L2′, L1, L3′, L1, L3
    assert labels("silicon", "Γ", 8)[:4] == ["Γ1", "Γ25′", "Γ15", "Γ2′"]
    assert labels("silicon", "X", 6)[:3] == ["X1", "X4", "X1"]
    assert labels("silicon", "L", 8)[:5] == ["L2′", "L1", "L3′", "L1", "L3"]


def test_germanium_conduction_order_differs_from_silicon():
    # source: Cohen & Bergstresser 1966 (Ge): Γ2′ lies below Γ15 in germanium
    assert labels("germanium", "Γ", 8)[:4] == ["Γ1", "Γ25′", "Γ2′", "Γ15"]


def test_gallium_arsenide_zincblende_labels_and_origin():
    # source: Cohen & Bergstresser 1966 (GaAs) valence labels Γ1, Γ15; X1, X3, X5; L1, L1, L3
    # in the zincblende notation (Parmenter, Phys. Rev. 100, 573 (1955)); with the bundled
    # file's first atom at the origin
    assert labels("gallium-arsenide", "Γ", 4)[:2] == ["Γ1", "Γ15"]
    assert labels("gallium-arsenide", "X", 4)[:3] == ["X1", "X3", "X5"]
    assert labels("gallium-arsenide", "L", 4)[:3] == ["L1", "L1", "L3"]
    # X1 and X3 swap when the other atom sits at the origin; Γ and L labels stay
    # (source: Cardona & Yu, Fundamentals of Semiconductors, 4th ed. 2010, §2.3, from memory)
    assert labels("gallium-arsenide", "X", 4, origin_atom=1)[:3] == ["X3", "X1", "X5"]
    assert labels("gallium-arsenide", "L", 4, origin_atom=1)[:3] == ["L1", "L1", "L3"]


@pytest.mark.parametrize("name,point", [("silicon", "X"), ("silicon", "L"), ("silicon", "W"),
                                        ("gallium-arsenide", "X"), ("aluminium", "W"),
                                        ("aluminium", "K")])
def test_dimensions_equal_degeneracies_and_characters_are_orthogonal(name, point):
    # source: great orthogonality theorem for the small representations of the little group
    # (Bradley & Cracknell, The Mathematical Theory of Symmetry in Solids, 1972, ch. 4)
    m = bundled(name)
    k = np.array(standard_path(m)[0][point])
    frame = space_group_frame(m)
    group = little_group(frame, k)
    gram = group.characters.conj() @ group.characters.T / group.order
    assert np.allclose(gram, np.eye(len(group.irreps)), atol=1e-9)
    assert np.sum(group.dimensions ** 2) == group.order  # no factor system left at these k
    ps = label_point(m, CUTOFF, k, point, 8, frame=frame)
    for lv in ps.levels:
        if not lv.accidental:
            assert lv.degeneracy == sum(group.dimensions[i] for i in lv.irreps)
            assert len(lv.irreps) == 1 or lv.time_reversal


def test_diamond_x_irreps_are_all_two_dimensional():
    # source: Herring, J. Franklin Inst. 233, 525 (1942): at X of the diamond structure every
    # small irrep has dimension 2 (the glide/screw operations stick the levels in pairs)
    m = bundled("silicon")
    group = little_group(space_group_frame(m), np.array(standard_path(m)[0]["X"]))
    assert set(group.dimensions.tolist()) == {2} and len(group.irreps) == 4


def test_labels_do_not_depend_on_the_cutoff():
    for point, n in (("Γ", 8), ("X", 6), ("L", 8)):
        assert labels("silicon", point, n, 5 * RY)[:4] == labels("silicon", point, n, 10 * RY)[:4]


def test_labels_do_not_depend_on_the_origin_of_the_file_for_diamond():
    # the same silicon crystal written with an atom at the origin: the tool moves to the bond
    # centre (an inversion centre) before naming, so the labels are the same
    si = bundled("silicon")
    shifted = make_material({"type": "fcc", "a_A": si.a_A},
                            [{"species": "Si", "position": [0.0, 0.0, 0.0]},
                             {"species": "Si", "position": [0.25, 0.25, 0.25]}],
                            {"form": "symmetric-antisymmetric", "unit": "Ry",
                             "shells": [3, 8, 11], "symmetric": [-0.21, 0.04, 0.08],
                             "antisymmetric": [0.0, 0.0, 0.0]})
    k = np.array(standard_path(si)[0]["L"])
    a = label_point(si, CUTOFF, k, "L", 8)
    b = label_point(shifted, CUTOFF, k, "L", 8)
    assert [lv.label for lv in a.levels] == [lv.label for lv in b.levels]
    assert b.origin.startswith("bond centre")


def test_crystal_without_symmetry_reduces_gracefully():
    m = make_material({"type": "sc", "a_A": 4.0},
                      [{"species": "A", "position": [0.0, 0.0, 0.0]},
                       {"species": "B", "position": [0.21, 0.37, 0.13]},
                       {"species": "C", "position": [0.61, 0.17, 0.43]}],
                      {"form": "per-species", "unit": "eV", "shells": [1, 2],
                       "species": {"A": [-1.0, -0.5], "B": [-0.7, 0.2], "C": [0.3, 0.1]}})
    ps = label_point(m, 60.0, np.array([0.5, 0.0, 0.0]), "X", 4)
    assert ps.note == NO_SYMMETRY and all(lv.label == NO_SYMMETRY for lv in ps.levels)


def test_aluminium_has_neutral_labels_where_no_name_is_tabled():
    names = labels("aluminium", "W", 4)
    assert all(n.startswith("W#") for n in names)
    # source: Bouckaert, Smoluchowski & Wigner 1936: Γ1 is the bottom of the fcc band
    assert labels("aluminium", "Γ", 1)[0] == "Γ1"


def test_bands_command_writes_and_prints_the_labels(tmp_path):
    code, out, err = run(["bands", str(MATERIALS / "silicon.toml"), "--k-points", "12",
                          "--exact-only", "--bands", "6", "--out", str(tmp_path)])
    assert code == 0, err
    doc = json.loads((tmp_path / "silicon-exact-bands.json").read_text())
    irreps = doc["results"]["irreps"]
    assert irreps["origin"].startswith("bond centre") and irreps["space_group"] == "Fd-3m"
    gamma = next(p for p in irreps["points"] if p["point"] == "Γ")
    assert [lv["label"] for lv in gamma["levels"]][:2] == ["Γ1", "Γ25′"]
    assert gamma["levels"][1]["degeneracy"] == 3 and gamma["little_cogroup_order"] == 48
    # the Γ25′ level is the valence-band maximum, the run's energy zero
    assert gamma["levels"][1]["energy_eV"] == pytest.approx(0.0, abs=1e-6)
    assert gamma["levels"][1]["energy_absolute_eV"] == pytest.approx(
        doc["results"]["energy_zero"]["absolute_eV"], abs=1e-6)
    assert "Γ25′" in out and "symmetry labels" in out


def test_one_and_two_dimensional_models_are_not_labelled(tmp_path):
    code, out, err = run(["bands", str(MATERIALS / "cosine-chain.toml"), "--k-points", "8",
                          "--exact-only", "--out", str(tmp_path)])
    assert code == 0, err
    doc = json.loads((tmp_path / "cosine-chain-exact-bands.json").read_text())
    assert doc["results"]["irreps"]["points"] == [] and "3D" in doc["results"]["irreps"]["note"]


@pytest.mark.parametrize("name,split_off", [("silicon-spin-orbit", "Γ7+"),
                                            ("germanium-spin-orbit", "Γ7+"),
                                            ("gallium-arsenide-spin-orbit", "Γ7")])
def test_double_group_labels_at_the_valence_top(name, split_off):
    # source: Koster, Dimmock, Wheeler & Statz, Properties of the Thirty-Two Point Groups (1963),
    # double groups O_h and T_d; Yu & Cardona, Fundamentals of Semiconductors (2010), §2.6
    # (from memory): with spin–orbit the valence top Γ25′ (Γ15) becomes Γ8 (four-fold) above
    # the split-off Γ7 (two-fold); the s-like bottom Γ1 becomes Γ6
    m = bundled(name)
    ps = label_point(m, CUTOFF, np.zeros(3), "Γ", 8)
    lv = [(x.label, x.degeneracy) for x in ps.levels]
    assert lv[0] == ("Γ6+" if "+" in split_off else "Γ6", 2)
    assert lv[1] == (split_off, 2) and lv[2][1] == 4 and lv[2][0].startswith("Γ8")
    assert not any(x.accidental for x in ps.levels)
