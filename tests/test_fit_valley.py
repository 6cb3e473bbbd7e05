"""Fit targets at a conduction minimum off the labelled points, and mass derivatives."""

from __future__ import annotations

import dataclasses

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
    line, t = fit.targets.valleys[4, None], fit.targets.t_min[4, None]
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


#: Spin–orbit silicon with nonlocal wells at a small basis: every kind of term of H (at 45 eV
#: the band has a second minimum at X and Brent's bracket ends on the kink between the two).
SPIN_ORBIT_CUTOFF_EV = 60.0
WELLS = {"species": {"Si": {"A0_eV": 0.4, "R0_A": 1.06, "A2_eV": 0.3, "R2_A": 1.2}}}

SHARED = [*VALLEY,
          {"quantity": "mass", "at": "Γ:v3", "direction": [1, 0, 0], "value": 0.2,
           "tolerance": 0.02, "source": SOURCE},
          {"quantity": "energy", "at": "X:v1", "value": -2.9, "tolerance": 0.3,
           "source": SOURCE},
          {"quantity": "delta_so", "value": 0.044, "tolerance": 0.002, "source": SOURCE}]


def spin_orbit_fit(reuse):
    path = bundled("silicon-spin-orbit").file
    doc = read_toml_document(path)
    doc["nonlocal"] = WELLS
    keys = ["potential.symmetric[0]", "spin_orbit.species.Si.strength_eV",
            "nonlocal.species.Si.A0_eV", "nonlocal.species.Si.R2_A", "lattice.a_A"]
    spec = parse_targets({"parameters": keys, "cutoff_eV": SPIN_ORBIT_CUTOFF_EV, "targets": SHARED},
                         "t.toml", parse_material(doc, path))
    return Fit(doc, path, spec, reuse=reuse)


def test_shared_states_and_secant_search_give_the_reference_values_and_jacobian():
    # common practice, no source: the shared eigenpairs, the secant search on the
    # Hellmann–Feynman slope and the term-wise ∂H/∂p are the same quantities as the reference
    # path (every target diagonalises its own points, Brent's search, whole-matrix
    # differences), so they agree to the search's tolerance
    fast, slow = spin_orbit_fit(True), spin_orbit_fit(False)
    p = fast.start * np.array([1.02, 0.97, 1.05, 0.99, 1.0005])
    for _ in range(2):  # the second time from the warm start and curvature of the first
        r_fast, r_slow = fast.residuals(p), slow.residuals(p)
        assert np.allclose(r_fast, r_slow, rtol=0, atol=1e-6), r_fast - r_slow
        before = fast.evaluate(p).states.diagonalisations
        j_fast, j_slow = fast.jacobian(p), slow.jacobian(p)
        # the Jacobian at p diagonalises nothing new: the residuals at p left every state
        assert fast.evaluate(p).states.diagonalisations == before
        scale = np.max(np.abs(j_slow), axis=0)
        assert np.all(np.abs(j_fast - j_slow) <= 1e-6 * scale), (j_fast - j_slow) / scale
        p = p * 1.001


def test_term_wise_parameter_slopes_equal_finite_differences():
    # source: Hellmann–Feynman theorem (R. P. Feynman, Phys. Rev. 56, 340 (1939)); ∂H/∂p built
    # from the changed terms alone (potential, spin–orbit, nonlocal wells; whole matrices for
    # the lattice constant) against central differences of the targets themselves
    fit = spin_orbit_fit(True)
    hf = fit.jacobian(fit.start)
    fd = fit.jacobian(fit.start, finite_differences=True)
    scale = np.max(np.abs(fd), axis=0)
    at_minimum = np.array([t.at.label == "min" and t.quantity == "mass"
                           for t in fit.spec.targets])
    assert np.all(np.abs(hf - fd)[~at_minimum] <= 1e-5 * scale), (hf - fd) / scale
    assert np.all(np.abs(hf - fd)[at_minimum] <= 1e-3 * scale), (hf - fd) / scale


def test_secant_search_finds_brents_minimum():
    # common practice, no source: a minimum of E(t) is a zero of dE/dt; the secant search on
    # the Hellmann–Feynman slope and Brent's search on E must find the same point
    from bandpert.physics.fit_states import PointStates
    from bandpert.physics.fit_valley import follow_minimum

    fit = fit_of(["potential.symmetric[0]"], VALLEY[:1])
    material, line = fit.material(fit.start), fit.targets.valleys[4, None]
    e_ref, t_ref = valley_minimum(material, line, 4, False, line.t_start)
    states = PointStates(material, 8)
    e, t, curvature = follow_minimum(states, line, 4, False, line.t_start)
    assert t == pytest.approx(t_ref, abs=3e-8) and e == pytest.approx(e_ref, abs=1e-11)
    # warm started from a nearby point with the curvature found: a few diagonalisations
    warm = PointStates(material, 8)
    e2, t2, _ = follow_minimum(warm, line, 4, False, t + 2e-3, curvature)
    assert t2 == pytest.approx(t, abs=3e-8) and warm.diagonalisations <= 4
    # a minimum at the end of the line (the line cut at 0.5 of Γ–X: E falls all the way):
    # the secant step leaves the bracket and Brent's search with its end check decides
    short = dataclasses.replace(line, end_frac=line.start_frac + 0.5 * (line.end_frac
                                                                        - line.start_frac))
    assert short.start_label == "Γ"
    e3, t3, _ = follow_minimum(PointStates(material, 8), short, 4, False, 0.95)
    assert (e3, t3) == pytest.approx(valley_minimum(material, short, 4, False, 0.95))
    assert t3 == 1.0


def test_secant_search_near_a_symmetric_end_point():
    # common practice, no source: germanium's minimum lies at L (the end of Γ–L; on the line's
    # fixed plane waves just inside it), where pairs of plane waves with |K| = |K'| made a
    # two-point k difference of H too noisy for the secant; the search must meet Brent's
    # minimum without falling back to it (a fallback costs some fifteen diagonalisations)
    from bandpert.physics.fit_states import PointStates
    from bandpert.physics.fit_valley import follow_minimum

    material = bundled("germanium-fitted")
    line = find_valley_line(material, 90.0, 8)
    assert {line.start_label, line.end_label} == {"Γ", "L"}
    states = PointStates(material, 12)
    e, t, _ = follow_minimum(states, line, 8, True, line.t_start)
    e_ref, t_ref = valley_minimum(material, line, 8, True, line.t_start)
    # Brent's t is only as sharp as E(t) is above its rounding: eigenvalues of an H with norm
    # near 100 eV carry about 1e-13 eV, so at this minimum's curvature (4.7 eV per t², the
    # energy-dependent well's file) t is defined to √(2·1e-13/4.7) ≈ 2e-7; the energies agree
    # to 1e-11 (measured 2.5e-14, t apart by 1.5e-7)
    assert t == pytest.approx(t_ref, abs=3e-7) and e == pytest.approx(e_ref, abs=1e-11)
    assert states.diagonalisations <= 6


def test_a_table_change_its_term_does_not_show_takes_the_whole_matrices(monkeypatch):
    # common practice, no source: if a nonlocal key reached the model by another road than
    # the term ∂H/∂p is built from, the term-wise slope would miss it; the whole matrices see
    # it. Hidden here by giving ∂H/∂p's builder the starting term at every parameter value.
    import bandpert.physics.fit_states as fit_states

    reference = spin_orbit_fit(True)
    expected = reference.jacobian(reference.start)
    fit = spin_orbit_fit(True)
    hidden = fit_states.nonlocal_term(fit.material(fit.start))
    monkeypatch.setattr(fit_states, "nonlocal_term", lambda material: hidden)
    got = fit.jacobian(fit.start)
    scale = np.max(np.abs(expected), axis=0)
    # the whole matrices' difference carries the rounding of their kinetic diagonal (~200 eV)
    # over δ, which the mass rows (1/Δ of a second difference) raise to ~3e-6 of the column
    assert np.all(np.abs(got - expected) <= 1e-5 * scale), (
        np.max(np.abs(got - expected) / scale, axis=0))
    assert np.max(np.abs(got - expected)) > 0  # it did take the other road
