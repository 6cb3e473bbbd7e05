"""A fit's check that each followed conduction minimum is still its band's lowest."""

from __future__ import annotations

import dataclasses

import numpy as np
from conftest import bundled

from bandpert.crystal.lattice import standard_path
from bandpert.physics.fit_checks import moved_minima
from bandpert.physics.fit_targets import TargetModel, parse_targets
from bandpert.planewave.solver import single_blas_thread

#: A small basis: the check compares two minima of one model, at any basis.
CUTOFF_EV = 60.0

SOURCE = "identity checked by the test"


def silicon_targets():
    material = bundled("silicon")
    spec = parse_targets({"parameters": ["potential.symmetric[0]"], "cutoff_eV": CUTOFF_EV,
                          "targets": [{"quantity": "energy", "at": "min:c1", "value": 1.17,
                                       "tolerance": 0.01, "source": SOURCE}]},
                         "t.toml", material)
    with single_blas_thread():
        return material, TargetModel(material, spec.targets, CUTOFF_EV)


def test_a_minimum_that_stays_lowest_gives_no_warning():
    # source: silicon's conduction minimum lies on Γ–X near 0.85 (Cohen & Bergstresser, Phys.
    # Rev. 141, 789 (1966)); the followed line is the one the search found, so nothing moved
    material, targets = silicon_targets()
    (line,) = targets.valleys.values()
    assert line.name in ("Γ–X", "X–Γ")
    with single_blas_thread():
        assert moved_minima(targets, material) == ()


def test_a_followed_valley_above_the_band_minimum_is_named():
    # source: silicon's L conduction valley lies about 1 eV above its Δ minimum (Cohen &
    # Bergstresser 1966, Fig. of the bands): a fit that had followed the Γ–L line would describe
    # a valley that is not the lowest, and the check must say so, naming both lines
    material, targets = silicon_targets()
    (valley, line), = targets.valleys.items()
    points = standard_path(material)[0]
    followed = dataclasses.replace(line, start_label="Γ", end_label="L",
                                   start_frac=np.asarray(points["Γ"], float),
                                   end_frac=np.asarray(points["L"], float), t_start=1.0)
    targets.valleys[valley], targets.t_min[valley] = followed, 1.0
    with single_blas_thread():
        (warning,) = moved_minima(targets, material)
    assert "min:c1" in warning and "Γ–L" in warning and "Γ–X" in warning
    assert "moved" in warning
