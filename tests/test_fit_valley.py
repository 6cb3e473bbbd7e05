"""Fit targets at a conduction minimum off the labelled points, and mass derivatives."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled

from bandpert.errors import InputError
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.fit_targets import parse_targets
from bandpert.physics.fit_valley import find_valley_line, valley_minimum
from bandpert.planewave.model import build_k_centred_model
from bandpert.planewave.solver import exact_energies
from bandpert.runs.fit import Fit
from bandpert.units import HBAR2_OVER_2M0_EV_A2

#: A small basis keeps the tests fast; the identities tested hold at any basis.
CUTOFF_EV = 60.0

SOURCE = "identity checked by the test"

VALLEY = [
    {"quantity": "energy", "at": "min:c1", "value": 1.17, "tolerance": 0.01, "source": SOURCE},
    {"quantity": "mass", "at": "min:c1", "direction": "along", "value": 0.9, "tolerance": 0.02,
     "source": SOURCE},
    {"quantity": "mass", "at": "min:c1", "direction": "across", "value": 0.19,
     "tolerance": 0.005, "source": SOURCE},
    {"quantity": "mass", "at": "Γ:v1", "direction": [1, 0, 0], "value": 0.3,
     "tolerance": 0.03, "source": SOURCE},
]


def spinless_silicon():
    material = bundled("silicon")
    return read_toml_document(material.file), material.file


def fit_of(keys, targets):
    doc, path = spinless_silicon()
    spec = parse_targets({"parameters": keys, "cutoff_eV": CUTOFF_EV, "targets": targets},
                         "t.toml", parse_material(doc, path))
    return Fit(doc, path, spec)


def test_silicon_conduction_minimum_lies_near_0_85_of_gamma_to_x():
    # source: the silicon conduction minimum lies on Δ at about 0.85 of the way from Γ to X
    # (P. Y. Yu & M. Cardona, Fundamentals of Semiconductors, 4th ed. 2010, §2.5 and Table
    # 2.24; from memory); the 1966 model puts it at 0.85 too (bandpert masses: 0.854)
    material = bundled("silicon")
    cutoff = material.cutoff_eV or 100.0
    line = find_valley_line(material, cutoff, 4)
    assert {line.start_label, line.end_label} == {"Γ", "X"}
    energy, t = valley_minimum(material, line, 4, False, line.t_start)
    distance = t if line.start_label == "Γ" else 1.0 - t
    assert distance == pytest.approx(0.85, abs=0.03)
    # the minimum on the line's fixed plane waves equals the k-centred exact bands there
    k = line.k_cart(material, t)
    exact = exact_energies(build_k_centred_model(material, cutoff), k[None, :], 5)[0, 4]
    assert energy == pytest.approx(exact, abs=2e-3)


def test_masses_at_the_minimum_equal_a_parabola_through_exact_bands():
    # source: m*/m0 = (ħ²/m0) / (d²E/dk²) (common practice, no source); the check is against
    # an independent parabola fit of the k-centred exact bands around the minimum
    fit = fit_of(["potential.symmetric[0]"], VALLEY)
    material = fit.material(fit.start)
    values = fit.targets.values(material)
    line, t = fit.targets.valleys[4], fit.targets.t_min[4]
    k0 = line.k_cart(material, t)
    model = build_k_centred_model(material, CUTOFF_EV)
    h = np.linspace(-0.02, 0.02, 9) * 2 * np.pi / material.a_A
    for which, value in (("along", values[1]), ("across", values[2])):
        d = line.direction(material, which)
        e = exact_energies(model, k0[None, :] + h[:, None] * d, 5)[:, 4]
        curvature = 2 * np.polyfit(h, e, 4)[2]
        assert value == pytest.approx(2 * HBAR2_OVER_2M0_EV_A2 / curvature, rel=0.02)


def test_derivatives_at_the_minimum_equal_finite_differences():
    # source: envelope theorem (dE_min/dp = ∂E/∂p at the minimum) with Hellmann–Feynman
    # (R. P. Feynman, Phys. Rev. 56, 340 (1939)); the masses' derivatives include the motion of
    # the minimum (implicit function theorem); compared with central differences whose steps are
    # large enough to rise above the minimum search's tolerance
    keys = ["potential.symmetric[0]", "potential.symmetric[1]", "lattice.a_A"]
    fit = fit_of(keys, VALLEY)
    jac = fit.jacobian(fit.start) * fit.tolerances[:, None]
    steps = np.array([2e-3, 1e-3, 2e-3])
    for j, step in enumerate(steps):
        up, down = fit.start.copy(), fit.start.copy()
        up[j] += step
        down[j] -= step
        fd = (fit.targets.values(fit.material(up))
              - fit.targets.values(fit.material(down))) / (2 * step)
        scale = np.maximum(np.abs(fd), 1e-3)
        assert np.all(np.abs(jac[:, j] - fd) <= 0.02 * scale), (j, jac[:, j], fd)


@pytest.mark.parametrize("change, key, words", [
    ({"at": "min:v1"}, "targets[0].at", "minimum of a conduction band"),
    ({"quantity": "mass", "direction": "sideways"}, "targets[0].direction",
     "unknown direction 'sideways'"),
    ({"quantity": "mass", "at": "X:c1", "direction": "along"}, "targets[0].direction",
     "expected"),
])
def test_bad_minimum_targets_are_refused_in_one_line(change, key, words):
    doc, path = spinless_silicon()
    target = {**VALLEY[0], **change}
    with pytest.raises(InputError) as info:
        parse_targets({"parameters": ["lattice.a_A"], "targets": [target]}, "t.toml",
                      parse_material(doc, path))
    assert info.value.key == key and words in str(info.value) and "\n" not in str(info.value)
