"""The trust mark keeps its word off the defaults: a seeded family of crystals and settings.

Reference everywhere: exact diagonalisation of the same H(k) (LAPACK). The family and the
measurement are those of tests/benchmarks/honesty.py, which runs the whole product and prints
the table quoted in the README; here a seeded sample of it runs in CI.
"""

from __future__ import annotations

import copy
import itertools
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent / "benchmarks"))
from honesty import CRYSTALS, SCALES, THRESHOLDS, TOLERANCE_EV, run_case  # noqa: E402

from bandpert.data import MATERIALS_DIR  # noqa: E402
from bandpert.input.material import parse_material  # noqa: E402
from bandpert.input.reader import read_toml_document  # noqa: E402
from bandpert.physics.bands import compute_band_structure  # noqa: E402
from bandpert.physics.perturbative_bands import PerturbationSettings  # noqa: E402

MATERIALS = MATERIALS_DIR / "planewave"


def _family_sample(count: int, seed: int = 13) -> list[tuple]:
    """``count`` cases of crystal × scale × threshold × order (1-4), every crystal included."""
    rng = np.random.default_rng(seed)
    cases = list(itertools.product(CRYSTALS, SCALES, THRESHOLDS, (1, 2, 3, 4)))
    picked = [cases[i] for i in rng.permutation(len(cases))]
    out = [next(c for c in picked if c[0] == name) for name in CRYSTALS]
    out += [c for c in picked if c not in out][: count - len(out)]
    return out


@pytest.mark.parametrize("case", _family_sample(16), ids=lambda c: "-".join(map(str, c)))
def test_trusted_points_are_within_the_tolerance(case):
    # Acceptance of the trust mark: at most 1 % of trusted (band, k) points over the
    # tolerance and none over twice it (the proven bound gives none at all).
    name, scale, threshold, order = case
    o = run_case(name, scale, threshold, order, n_k=40)
    err = o.error_eV[o.trusted_bound]
    assert np.sum(err > TOLERANCE_EV) <= 0.01 * err.size
    assert np.all(err <= 2 * TOLERANCE_EV)
    assert np.all(err < TOLERANCE_EV)
    assert np.all(o.error_eV <= o.bound_eV)  # the bound holds on every point, trusted or not


def _scaled_document(name: str, factor: float) -> dict:
    """A bundled material file with every form factor multiplied by ``factor`` (no electron
    count: absolute energies, no Fermi-level mesh where the scaled crystal turns metallic)."""
    doc = copy.deepcopy(read_toml_document(MATERIALS / f"{name}.toml"))
    doc.pop("electrons", None)
    pot = doc["potential"]
    for key in ("symmetric", "antisymmetric"):
        if key in pot:
            pot[key] = [factor * x for x in pot[key]]
    for species in pot.get("species", {}):
        pot["species"][species] = [factor * x for x in pot["species"][species]]
    return doc


def _trusted_errors(material, n_k: int, cutoff_eV: float | None = None, **settings):
    bs = compute_band_structure(material, n_k=n_k, cutoff_eV=cutoff_eV,
                                perturbation=PerturbationSettings(radius_points=0, **settings))
    return bs, bs.comparison.abs_error_eV[bs.perturbative.trustworthy]


@pytest.mark.parametrize("threshold", [0.25])
def test_silicon_threshold_quarter_regression(silicon, threshold):
    # Failing case of issue 13: with --threshold 0.25, 120 k-points, 3 of 6 trusted points were
    # over 5 meV, one 84 meV off.
    bs, err = _trusted_errors(silicon, 120, coupling_threshold=threshold)
    assert np.all(err < 0.005)
    assert bs.comparison.over_tolerance_trustworthy == 0
    assert bs.comparison.bound_coverage == 1.0


@pytest.mark.parametrize("name, cutoff", [("silicon", 197.3), ("gallium-arsenide", 197.3)])
def test_halved_form_factors_regression(name, cutoff):
    # Failing case of issue 13: silicon with every form factor halved had trusted points
    # 8-11 meV off (estimate 3.4 meV), GaAs 12.4 meV.
    material = parse_material(_scaled_document(name, 0.5), f"<{name} halved>")
    bs, err = _trusted_errors(material, 80, cutoff_eV=cutoff)
    assert np.all(err < 0.005)
    assert bs.comparison.trustworthy_fraction > 0.2  # measured 0.40 (Si), 0.41 (GaAs)


@pytest.mark.parametrize("threshold", [0.25, 0.05])
def test_aluminium_thresholds_regression(threshold):
    # Failing cases of issue 13: aluminium at --threshold 0.25 had a trusted point 61 meV off,
    # at 0.05 one 12.7 meV off.
    material = parse_material(read_toml_document(MATERIALS / "aluminium.toml"), "aluminium")
    bs, err = _trusted_errors(material, 200, coupling_threshold=threshold)
    assert np.all(err < 0.005)
    assert bs.comparison.trustworthy_fraction >= 0.5


@pytest.mark.parametrize("name", ["silicon", "germanium", "gallium-arsenide", "aluminium"])
def test_coverage_with_quarter_potentials(name):
    # Honesty is not bought by trusting nothing: with the form factors at 0.25x the perturbation
    # is weak. At third order >= 80 % of points must be trusted (measured 86.9 % Si, 97.3 % Ge,
    # 97.7 % GaAs, 99.4 % Al at 60 k-points). At second order no honest mark can reach 80 % for
    # the semiconductors (only 57 % of silicon's points are within 5 meV of exact, 71 % Ge, 58 %
    # GaAs): there the mark must trust nearly every point that is within the tolerance.
    material = parse_material(_scaled_document(name, 0.25), f"<{name} x0.25>")
    bs, err = _trusted_errors(material, 60, cutoff_eV=CRYSTALS[name][1], order=3)
    assert np.all(err < 0.005)
    assert bs.comparison.trustworthy_fraction >= 0.8
    bs, err = _trusted_errors(material, 60, cutoff_eV=CRYSTALS[name][1], order=2)
    within = np.mean(bs.comparison.abs_error_eV < 0.005)
    assert np.all(err < 0.005)
    assert bs.comparison.trustworthy_fraction >= 0.97 * within
