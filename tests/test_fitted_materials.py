"""The bundled *-fitted files: spin–orbit (and nonlocal) models fitted by `bandpert fit` to
measured low-temperature values (targets: bandpert/data/fit_targets/<name>-spin-orbit.toml).

Each target of each file is a check against its published source (named in the targets file
beside the value, "from memory" where recalled). A target the fit could not bring within its
tolerance is a strict xfail carrying the measured number, so the day a refit meets it the test
says so.
"""

from __future__ import annotations

import functools
from importlib import resources

import numpy as np
import pytest
from conftest import bundled

from bandpert.crystal.lattice import reciprocal_vectors
from bandpert.input.reader import read_toml_document
from bandpert.physics.fit_targets import TargetModel, parse_targets
from bandpert.physics.kp_from_planewave import spin_orbit_valence_top
from bandpert.planewave.model import build_k_centred_model
from bandpert.planewave.solver import exact_energies

FITTED = {"silicon": "silicon-fitted", "germanium": "germanium-fitted",
          "gallium-arsenide": "gallium-arsenide-fitted"}

#: (material, target name) → the model value the fit reached, outside the tolerance.
OUTSIDE = {
    ("germanium", "valence band width (Γ1)"): "−13.5 eV against −12.6 ± 0.6",
    ("gallium-arsenide", "light hole [100]"): "0.0996 m0 against 0.090 ± 0.008",
    ("gallium-arsenide", "valence band width (Γ1)"): "−12.02 eV against −13.1 ± 0.6",
}


def targets_document(stem: str) -> dict:
    path = resources.files("bandpert.data") / "fit_targets" / f"{stem}-spin-orbit.toml"
    return read_toml_document(path)


@functools.cache
def model_values(stem: str) -> tuple:
    material = bundled(FITTED[stem])
    spec = parse_targets(targets_document(stem), f"{stem} targets", material)
    values = TargetModel(material, spec.targets, material.cutoff_eV).values(material)
    return spec.targets, values


def cases():
    out = []
    for stem in FITTED:
        for i, entry in enumerate(targets_document(stem)["targets"]):
            reason = OUTSIDE.get((stem, entry["name"]))
            marks = [pytest.mark.xfail(strict=True, reason=f"fit: {reason}")] if reason else []
            out.append(pytest.param(stem, i, marks=marks, id=f"{stem}-{entry['name']}"))
    return out


@pytest.mark.parametrize("stem, index", cases())
def test_fitted_file_meets_each_target_within_its_tolerance(stem, index):
    # source: each target's own source, named in the targets file beside its value
    targets, values = model_values(stem)
    target = targets[index]
    assert abs(values[index] - target.value) <= target.tolerance, (
        f"{target.name}: {values[index]:.5g} against {target.value} ± {target.tolerance}")


def test_fitted_gallium_arsenide_conduction_mass_is_not_a_target_yet_within_15_percent():
    # source: m_e = 0.067 m0 (I. Vurgaftman, J. R. Meyer & L. R. Ram-Mohan, J. Appl. Phys. 89,
    # 5815 (2001), Table III); not among the fit's targets, so an independent check
    material = bundled(FITTED["gallium-arsenide"])
    names = {t["name"] for t in targets_document("gallium-arsenide")["targets"]}
    assert not any("electron mass" in n or "conduction mass" in n for n in names)
    top = spin_orbit_valence_top(material, material.cutoff_eV)
    assert top.conduction_m0 == pytest.approx(0.067, rel=0.15)


@pytest.mark.parametrize("stem", list(FITTED))
def test_fitted_files_keep_the_l3_splitting_near_two_thirds_of_delta0(stem):
    # source: the L3 splitting is 2/3 of Δ0 for pure p states (P. Y. Yu & M. Cardona,
    # Fundamentals of Semiconductors, ch. 2); accepted between 0.60 and 0.72
    material = bundled(FITTED[stem])
    model = build_k_centred_model(material, material.cutoff_eV)
    b = reciprocal_vectors(material.vectors_A)
    gamma, ell = exact_energies(model, np.array([[0, 0, 0], [0.5, 0.5, 0.5]]) @ b, 8)
    delta = gamma[4] - gamma[2]
    assert 0.60 <= (ell[6] - ell[4]) / delta <= 0.72
