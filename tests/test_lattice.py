"""Brillouin-zone geometry, symmetry and path sampling."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled, make_material

from bandpert.crystal.lattice import (
    crystal_symmetry,
    reciprocal_vectors,
    sample_path,
    standard_path,
)

A, C = 4.0, 6.5


def _distances(lattice: dict) -> dict[str, float]:
    material = make_material(lattice, [{"species": "X", "position": [0.0, 0.0, 0.0]}],
                             {"form": "empty"})
    points, _ = standard_path(material)
    b = reciprocal_vectors(material.vectors_A)
    return {label: float(np.linalg.norm(np.array(p) @ b)) for label, p in points.items()}


# Source: Setyawan & Curtarolo, Comput. Mater. Sci. 49, 299 (2010), Tables 3, 4 and 8 (coordinates
# of
# the high-symmetry points); the distances follow from them.
@pytest.mark.parametrize("lattice,label,expected", [
    ({"type": "fcc", "a_A": A}, "X", 2 * np.pi / A),
    ({"type": "fcc", "a_A": A}, "L", np.sqrt(3) * np.pi / A),
    ({"type": "fcc", "a_A": A}, "K", 3 * np.sqrt(2) * np.pi / (2 * A)),
    ({"type": "fcc", "a_A": A}, "W", np.sqrt(5) * np.pi / A),
    ({"type": "bcc", "a_A": A}, "H", 2 * np.pi / A),
    ({"type": "bcc", "a_A": A}, "N", np.sqrt(2) * np.pi / A),
    ({"type": "bcc", "a_A": A}, "P", np.sqrt(3) * np.pi / A),
    ({"type": "hexagonal", "a_A": A, "c_A": C}, "M", 2 * np.pi / (np.sqrt(3) * A)),
    ({"type": "hexagonal", "a_A": A, "c_A": C}, "K", 4 * np.pi / (3 * A)),
    ({"type": "hexagonal", "a_A": A, "c_A": C}, "A", np.pi / C),
])
def test_high_symmetry_distances(lattice, label, expected):
    assert _distances(lattice)[label] == pytest.approx(expected, rel=1e-9)


def test_reciprocal_vectors_are_dual():
    # a_i · b_j = 2π δ_ij (source: Ashcroft & Mermin, Solid State Physics (1976), eq. 5.4).
    a = bundled("silicon").vectors_A
    assert np.allclose(a @ reciprocal_vectors(a).T, 2 * np.pi * np.eye(3))


@pytest.mark.parametrize("name,number", [("silicon", 227), ("germanium", 227),
                                         ("gallium-arsenide", 216), ("aluminium", 225)])
def test_space_groups(name, number):
    # Diamond Fd-3m (227), zincblende F-43m (216), fcc metal Fm-3m (225): International Tables
    # for Crystallography, Vol. A (common practice, no source).
    assert crystal_symmetry(bundled(name)).number == number


def test_path_sampling_is_even_in_length_and_hits_every_label():
    material = bundled("silicon")
    points, legs = standard_path(material)
    b = reciprocal_vectors(material.vectors_A)
    path = sample_path(b, points, legs, 300)
    assert abs(len(path.k_frac) - 300) <= len(legs) + 8
    for i, label in zip(path.label_indices, path.labels, strict=True):
        assert np.allclose(path.k_frac[i], points[label.split("|")[0]])
    steps = np.diff(path.distance_invA)
    jump = np.isin(np.arange(1, len(path.k_frac)), path.leg_starts)
    assert np.all(steps[jump] == 0.0)
    assert np.ptp(steps[~jump]) < 0.25 * np.mean(steps[~jump])
    # path length equals the Cartesian length of the k-point steps inside legs
    dk = np.linalg.norm(np.diff(path.k_cart_invA, axis=0), axis=1)
    assert np.allclose(dk[~jump], steps[~jump])


@pytest.mark.parametrize("lattice,labels", [
    ({"type": "chain", "a_A": 3.0}, ("Γ", "X")),
    ({"type": "square", "a_A": 3.0}, ("Γ", "X", "M", "Γ")),
    ({"type": "rectangular", "a_A": 3.0, "b_A": 4.0}, ("Γ", "X", "S", "Y", "Γ")),
    ({"type": "hexagonal-2d", "a_A": 3.0}, ("Γ", "M", "K", "Γ")),
    ({"type": "oblique", "a_A": 3.0, "b_A": 4.0, "gamma_deg": 70.0}, ("Γ", "X", "S", "Y", "Γ")),
])
def test_own_low_dimensional_paths(lattice, labels):
    dim = {"chain": 1}.get(lattice["type"], 2)
    material = make_material(lattice, [{"species": "X", "position": [0.0] * dim}],
                             {"form": "empty"})
    points, legs = standard_path(material)
    assert legs == (labels,)


def test_hexagonal_2d_k_point_is_a_zone_corner():
    # K of the triangular lattice lies at 4π/(3a) from Γ (Setyawan & Curtarolo 2010, Table 8,
    # same point in 2D; common practice).
    a = 3.0
    d = _distances_2d({"type": "hexagonal-2d", "a_A": a})
    assert d["K"] == pytest.approx(4 * np.pi / (3 * a))
    assert d["M"] == pytest.approx(2 * np.pi / (np.sqrt(3) * a))


def _distances_2d(lattice):
    material = make_material(lattice, [{"species": "X", "position": [0.0, 0.0]}],
                             {"form": "empty"})
    points, _ = standard_path(material)
    b = reciprocal_vectors(material.vectors_A)
    return {label: float(np.linalg.norm(np.array(p) @ b)) for label, p in points.items()}


def test_custom_path_from_the_file():
    material = make_material({"type": "square", "a_A": 3.0},
                             [{"species": "X", "position": [0.0, 0.0]}], {"form": "empty"},
                             path={"points": {"G": [0, 0], "M": [0.5, 0.5]},
                                   "legs": [["Gamma", "M"]]})
    points, legs = standard_path(material)
    assert legs == (("Γ", "M"),) and points["M"] == (0.5, 0.5)
