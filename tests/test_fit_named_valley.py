"""Fit targets at a minimum on a named line ("min(Γ–X):c1"), and fits of an energy-dependent
l = 0 well (bandpert.planewave.nonlocal_term)."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled

from bandpert.errors import InputError
from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.fit_checks import moved_minima
from bandpert.physics.fit_targets import BandRef, parse_targets
from bandpert.planewave.solver import single_blas_thread
from bandpert.runs.fit import Fit

CUTOFF_EV = 60.0
SOURCE = "identity checked by the test"


def target(at, **more):
    return {"quantity": "energy", "at": at, "value": 1.0, "tolerance": 0.01, "source": SOURCE,
            **more}


def silicon_fit(targets, keys=("potential.symmetric[0]",), tables=None):
    path = bundled("silicon-spin-orbit").file
    doc = read_toml_document(path)
    doc.update(tables or {})
    spec = parse_targets({"parameters": list(keys), "cutoff_eV": CUTOFF_EV, "targets": targets},
                         "t.toml", parse_material(doc, path))
    return Fit(doc, path, spec)


@pytest.mark.parametrize("text", ["min(Γ–X):c1", "min(G-X):c1", "min( Γ - X ):c1"])
def test_a_named_line_is_read_in_either_dash(text):
    fit = silicon_fit([target(text)])
    (t,) = fit.spec.targets
    assert t.at == BandRef("min", "c", 1, ("Γ", "X")) and str(t.at) == "min(Γ–X):c1"


@pytest.mark.parametrize("text, words", [
    ("min(Γ–Q):c1", "unknown line"), ("min(X–X):c1", "two different labels"),
    ("min(Γ–X):v1", "minimum of a conduction band")])
def test_bad_named_lines_are_refused_in_one_line(text, words):
    with pytest.raises(InputError) as info:
        silicon_fit([target(text)])
    assert info.value.key == "targets[0].at" and words in str(info.value)
    assert "\n" not in str(info.value)


def test_a_named_line_holding_the_lowest_valley_is_the_same_valley():
    # common practice, no source: silicon's lowest conduction valley lies on Γ–X (Yu &
    # Cardona, Fundamentals of Semiconductors, 4th ed. 2010, §2.5; from memory), so the
    # minimum on the named line Γ–X and the band's lowest are one point; the difference
    # target is 0 to the search's tolerance, and the named valley is not "moved"
    fit = silicon_fit([target("min(Γ–X):c1", **{"from": "min:c1"}), target("min:c1")])
    with single_blas_thread():
        values = fit.evaluate(fit.start).values
        assert abs(values[0]) < 1e-8 and values[1] > 0.5
        assert moved_minima(fit.targets, fit.material(fit.start)) == ()
    assert set(fit.targets.valleys) == {(8, ("Γ", "X")), (8, None)}


def test_a_named_line_without_an_interior_minimum_is_refused():
    # source: silicon's conduction band falls monotonically from Γ15 to L1 along Λ (Cohen &
    # Bergstresser, Phys. Rev. 141, 789 (1966), Fig. of the bands; from memory): Γ–L holds no
    # valley between its ends, and a named line asks for one
    with pytest.raises(InputError) as info:
        silicon_fit([target("min(Γ–L):c1", **{"from": "min:c1"})])
    assert "no minimum inside the line Γ–L" in str(info.value)


def test_germaniums_delta_valley_is_followed_above_its_l_minimum():
    # source: germanium's conduction band minimum is at L, with the Δ valley near 0.85 of Γ→X
    # about 0.2 eV higher and Γ2′ between them on Γ–X (O. Madelung, Semiconductors: Data
    # Handbook (Springer 2004), Ge; from memory): the named line finds the interior Δ valley
    # (never an end of its line, even where Γ2′ lies lower) and the check does not call it
    # moved (at 100 eV to keep the test fast: 0.168 eV above L there, 0.183 at the file's 250)
    material = bundled("germanium-fitted")
    doc = read_toml_document(material.file)
    spec = parse_targets({"parameters": ["potential.symmetric[0]"], "cutoff_eV": 100.0,
                          "targets": [target("min(Γ–X):c1", **{"from": "min:c1"})]},
                         "t.toml", material)
    fit = Fit(doc, material.file, spec)
    with single_blas_thread():
        evaluation = fit.evaluate(fit.start)
        assert 0.8 < evaluation.t_min[8, ("Γ", "X")] < 0.95
        assert evaluation.values[0] > 0.05     # Δ above L
        assert moved_minima(fit.targets, fit.material(fit.start)) == ()


WELLS = {"nonlocal": {"species": {"Si": {"A0_eV": 0.4, "R0_A": 1.06, "A0_energy_slope": -0.1,
                                         "A2_eV": 0.3, "R2_A": 1.2}}}}


def test_energy_slope_jacobian_equals_finite_differences():
    # source: Hellmann–Feynman theorem (R. P. Feynman, Phys. Rev. 56, 340 (1939)) for
    # H(k) = S^{-1/2} H_c S^{-1/2} (whole-matrix ∂H/∂p: the metric multiplies every term), and
    # the envelope theorem at the named valley's minimum, against central differences of the
    # targets themselves
    targets = [target("min(Γ–X):c1", **{"from": "Γ:c1"}), target("Γ:v7"),
               {"quantity": "delta_so", "value": 0.044, "tolerance": 0.002, "source": SOURCE},
               {"quantity": "mass", "at": "min:c1", "direction": "along", "value": 0.9,
                "tolerance": 0.02, "source": SOURCE}]
    keys = ("potential.symmetric[0]", "nonlocal.species.Si.A0_eV",
            "nonlocal.species.Si.A0_energy_slope", "spin_orbit.species.Si.strength_eV")
    fit = silicon_fit(targets, keys, WELLS)
    with single_blas_thread():
        hf = fit.jacobian(fit.start)
        fd = fit.jacobian(fit.start, finite_differences=True)
    scale = np.max(np.abs(fd), axis=0)
    assert np.all(scale > 0)
    assert np.all(np.abs(hf - fd)[:3] <= 1e-5 * scale), (hf - fd) / scale
    assert np.all(np.abs(hf - fd)[3] <= 1e-3 * scale), (hf - fd) / scale
