"""Perturbative bands of spinor (spin–orbit) and nonlocal plane-wave models.

H0 = ħ²|k+G|²/2m0 ⊗ 1₂, V(k) = 1₂ ⊗ (V + V_NL(k)) + H_so(k), expanded at each k.
"""

from __future__ import annotations

import copy

import numpy as np
import pytest
from conftest import bundled
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.perturbation.bounds import eigenvalue_bounds, lowest_eigenvalue_lower_bound
from bandpert.physics.perturbative_bands import (
    ORDER_RANGE,
    THRESHOLD_RANGE,
    TOLERANCE_RANGE_EV,
    PerturbationSettings,
    compare,
    perturbative_bands,
)
from bandpert.planewave.model import build_model
from bandpert.planewave.solver import exact_energies

#: Slater-type core p orbitals (n, ζ in Å⁻¹) as in the bundled spin–orbit files.
CORE = {"Si": (2, 9.307), "Ge": (3, 13.07), "Ga": (3, 12.44), "As": (3, 13.70)}

#: Identities that hold at any basis size are checked on a small one (fast).
SMALL_CUTOFF_EV = 60.0


def with_spin_orbit(name: str, strengths_eV: dict[str, float], local: bool = True):
    """A bundled spinless file with a spin_orbit table added (its potential zeroed if not local)."""
    doc = read_toml_document(bundled(name).file)
    doc["spin_orbit"] = {"species": {
        s: {"strength_eV": lam, "core_shell": CORE[s][0], "slater_exponent_invA": CORE[s][1]}
        for s, lam in strengths_eV.items()}}
    if not local:
        pot = doc["potential"]
        for key in ("symmetric", "antisymmetric"):
            if key in pot:
                pot[key] = [0.0] * len(pot[key])
    return parse_material(doc, "<test>")


def path_k(material, count: int, seed: int = 3) -> np.ndarray:
    """Γ, X, L and random k-points (Cartesian, Å⁻¹)."""
    unit = 2 * np.pi / material.a_A
    fixed = np.array([[0, 0, 0], [1, 0, 0], [0.5, 0.5, 0.5]], float)
    rng = np.random.default_rng(seed)
    return unit * np.vstack([fixed, rng.uniform(-1, 1, (count, 3))])


@pytest.mark.parametrize("name, species", [("silicon", ["Si"]), ("gallium-arsenide", ["Ga", "As"])])
@pytest.mark.parametrize("order", [2, 4])
def test_zero_strength_gives_the_spinless_bands_each_doubled(name, species, order):
    # source: exact identity: with λ_so = 0, V(k) = 1₂ ⊗ V and H0 ⊗ 1₂, so every group of the
    # spinor series is a spinless group taken twice (no coupling between the spins) and every
    # perturbative level is the spinless one, twice
    spinless = build_model(bundled(name), SMALL_CUTOFF_EV)
    spinor = build_model(with_spin_orbit(name, dict.fromkeys(species, 0.0)), SMALL_CUTOFF_EV,
                         spin_orbit=True)
    k = path_k(bundled(name), 5)
    s = PerturbationSettings(order=order, radius_points=0)
    one = perturbative_bands(spinless, k, 8, s)
    two = perturbative_bands(spinor, k, 16, s)
    assert np.max(np.abs(two.energies_eV[:, 0::2] - one.energies_eV)) < 1e-10
    assert np.max(np.abs(two.energies_eV[:, 1::2] - one.energies_eV)) < 1e-10
    # the estimate sees the same series (spectral norm of a spin-diagonal block)
    assert np.allclose(two.error_estimate_eV[:, 0::2], one.error_estimate_eV, rtol=1e-6,
                       atol=1e-12)


@pytest.fixture(scope="module")
def fitted_runs():
    """Perturbative and exact (same basis) bands of the fitted files at a few k-points."""
    runs = {}
    for name in ("silicon-fitted", "germanium-fitted"):
        material = bundled(name)
        model = build_model(material, material.cutoff_eV, spin_orbit=True)
        k = path_k(material, 4)
        runs[name] = (model, k, exact_energies(model, k, 16))
    return runs


@pytest.mark.parametrize("name", ["silicon-fitted", "germanium-fitted"])
def test_kramers_pairs_in_the_perturbative_bands(fitted_runs, name):
    # source: Kramers' theorem with inversion (time reversal times inversion squares to −1 and
    # keeps k): every band twofold at every k (e.g. Dresselhaus, Dresselhaus & Jorio, Group
    # Theory, Springer 2008, ch. 16; from memory). The spin partners of H0 share one Löwdin
    # group, which the antiunitary symmetry maps to itself, so the pairs hold order by order.
    model, k, exact = fitted_runs[name]
    pb = perturbative_bands(model, k, 16, PerturbationSettings(order=3, radius_points=0))
    assert np.max(np.abs(pb.energies_eV[:, 0::2] - pb.energies_eV[:, 1::2])) < 1e-9
    assert np.all(pb.group_size >= 2)  # no spin-degenerate level left to the RS series
    # the exact Kramers pairs, as a check that the test sees spinor bands
    assert np.max(np.abs(exact[:, 0::2] - exact[:, 1::2])) < 1e-9


@settings(max_examples=6, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(order=st.integers(*ORDER_RANGE),
       threshold=st.floats(*THRESHOLD_RANGE),
       log_tol=st.floats(np.log10(TOLERANCE_RANGE_EV[0]), np.log10(TOLERANCE_RANGE_EV[1])),
       name=st.sampled_from(["silicon-fitted", "germanium-fitted"]))
def test_trustworthy_points_are_within_tolerance_at_every_setting(fitted_runs, order,
                                                                  threshold, log_tol, name):
    # source: the proven bound (perturbation/bounds.py: Kahan 1967, Kato–Temple, Haynsworth
    # 1968) against the exact eigenvalues of the same spinor matrices (LAPACK zheevr)
    model, k, exact = fitted_runs[name]
    s = PerturbationSettings(order=order, coupling_threshold=threshold,
                             tolerance_eV=10.0**log_tol, radius_points=0)
    pb = perturbative_bands(model, k, 16, s)
    c = compare(exact, pb)
    assert c.over_tolerance_trustworthy == 0
    assert c.bound_coverage == 1.0


def test_gallium_arsenide_fitted_bound_holds():
    # source: as above; GaAs has no inversion, so its pairs split away from Γ (Dresselhaus
    # 1955) and the groups' 2 × 2 effective Hamiltonians must split them too
    material = bundled("gallium-arsenide-fitted")
    model = build_model(material, material.cutoff_eV, spin_orbit=True)
    k = path_k(material, 3)
    pb = perturbative_bands(model, k, 16, PerturbationSettings(order=4, radius_points=0))
    c = compare(exact_energies(model, k, 16), pb)
    assert c.bound_coverage == 1.0 and c.over_tolerance_trustworthy == 0
    assert c.trustworthy_fraction > 0


@pytest.mark.parametrize("strength, least_trusted", [(0.0, 0.9), (0.05, 0.5), (0.5, 0.0)])
def test_empty_lattice_with_spin_orbit_alone(strength, least_trusted):
    # source: exact solution: with V = 0 the levels are ħ²|k+G|²/2m0, each twice (free
    # electrons; every series terminates at order 0). With V_local = 0 and λ_so > 0 the
    # perturbation is H_so alone: its first order vanishes on a single plane wave
    # (K × K = 0), and the bound must cover the error against exact diagonalisation.
    material = with_spin_orbit("silicon", {"Si": strength}, local=False)
    model = build_model(material, SMALL_CUTOFF_EV, spin_orbit=True)
    k = path_k(material, 5)
    pb = perturbative_bands(model, k, 16, PerturbationSettings(order=2, radius_points=3))
    exact = exact_energies(model, k, 16)
    c = compare(exact, pb)
    assert c.bound_coverage == 1.0 and c.over_tolerance_trustworthy == 0
    # (the bound may not vouch for a shell cut by its block P: X at V = 0; a strong H_so
    # (0.5 eV, errors of eV) leaves most points untrusted, as it should)
    assert c.trustworthy_fraction >= least_trusted
    if strength == 0.0:
        free = np.sort(np.tile(model.kinetic_eV(k), 2), axis=1)[:, :16]
        assert np.max(np.abs(pb.energies_eV - free)) < 1e-12
        assert np.all(np.isinf(pb.convergence_radius))
    else:
        assert np.max(np.abs(pb.energies_eV - exact)) > 0  # the term does act


def test_cholesky_lower_bound_is_below_the_lowest_eigenvalue():
    # source: exact eigenvalues of random Hermitian matrices (numpy.linalg.eigvalsh)
    rng = np.random.default_rng(5)
    for _ in range(20):
        a = rng.normal(size=(30, 30)) + 1j * rng.normal(size=(30, 30))
        v = a + a.conj().T
        lowest = np.linalg.eigvalsh(v)[0]
        for guess in (lowest - 0.01, lowest + 0.5, lowest + 50.0):
            sigma = lowest_eigenvalue_lower_bound(v, guess, 0.1)
            assert sigma <= lowest


def test_bound_with_a_given_lower_bound_matches_the_eigenvalue_route():
    # source: the bound of perturbation/bounds.py computed two ways on the same Hermitian
    # problem (V_PQ V_QP from V² or from the columns; λ_min(V) exact or a lower bound of it)
    rng = np.random.default_rng(8)
    n = 80
    a = 0.3 * (rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n)))
    v = a + a.conj().T
    e0 = np.sort(rng.uniform(0, 40, n))[None, :]
    exact = np.linalg.eigvalsh(np.diag(e0[0]) + v)[None, :6]
    one = eigenvalue_bounds(e0, v, exact + 1e-3, block=20)
    two = eigenvalue_bounds(e0, v, exact + 1e-3, block=20,
                            v_lower=float(np.linalg.eigvalsh(v)[0]))
    assert np.allclose(one.error_bound, two.error_bound, rtol=1e-9, atol=1e-12)
    assert np.all(two.error_bound >= 1e-3 * (1 - 1e-9))


def test_gap_openings_of_a_zero_strength_spinor_model_are_the_spinless_ones_doubled():
    # source: exact identity (λ_so = 0: every group is the spinless one times both spins, so
    # first order, second order and the exact levels are the spinless ones, each twice)
    from bandpert.physics.nfe_gaps import gap_analysis

    one = gap_analysis(bundled("silicon"), n_bands=8, cutoff_eV=SMALL_CUTOFF_EV,
                       points=["X", "L"], crossings=False)
    two = gap_analysis(with_spin_orbit("silicon", {"Si": 0.0}), n_bands=16,
                       cutoff_eV=SMALL_CUTOFF_EV, points=["X", "L"], crossings=False)
    for p1, p2 in zip(one.points, two.points, strict=True):
        assert len(p1.groups) == len(p2.groups) > 0
        assert np.array_equal(2 * p1.level_first_indices, p2.level_first_indices)
        for g1, g2 in zip(p1.groups, p2.groups, strict=True):
            assert g2.degeneracy == 2 * g1.degeneracy and g2.first_index == 2 * g1.first_index
            for name in ("first_order_eV", "second_order_eV", "exact_eV"):
                a, b = getattr(g1, name), getattr(g2, name)
                assert np.max(np.abs(b[0::2] - a)) < 1e-10 and np.max(np.abs(b[1::2] - a)) < 1e-10
            assert np.allclose(g1.coupling_eV, g2.coupling_eV, atol=1e-12)
            assert g1.gap_opens_at == g2.gap_opens_at[1::2]  # [0::2]: inside a spin pair


def test_gap_openings_of_the_fitted_silicon_keep_kramers_pairs():
    # source: Kramers' theorem with inversion, as above: every first-order, second-order and
    # exact level of silicon's groups is twofold
    from bandpert.physics.nfe_gaps import gap_analysis

    material = bundled("silicon-fitted")
    report = gap_analysis(material, n_bands=16, cutoff_eV=SMALL_CUTOFF_EV, points=["Γ", "X"],
                          crossings=False)
    groups = [g for p in report.points for g in p.groups]
    assert groups and all(g.spin_components == 2 for g in groups)
    for g in groups:
        assert g.exact_eV.size == g.degeneracy == 2 * len(g.miller)
        for levels in (g.first_order_eV, g.second_order_eV, g.exact_eV):
            assert np.max(np.abs(levels[0::2] - levels[1::2])) < 1e-9


def test_full_zone_projection_of_spinor_models():
    # source: exact identities: with λ_so = 0 the projection on 2N spinor Γ states is the
    # spinless full-zone k·p on N states, each band twice; on the whole basis the projection is
    # a unitary transform of H(k), so it gives the exact bands (here the fitted germanium, with
    # spin–orbit and nonlocal terms)
    from bandpert.physics.fullzone import kp_basis_energies, projected_energies

    spinless = build_model(bundled("silicon"), SMALL_CUTOFF_EV)
    spinor = build_model(with_spin_orbit("silicon", {"Si": 0.0}), SMALL_CUTOFF_EV,
                         spin_orbit=True)
    k = path_k(bundled("silicon"), 3)
    a = kp_basis_energies(spinless, np.zeros(3), 15, k, 8)
    b = kp_basis_energies(spinor, np.zeros(3), 30, k, 16)
    assert np.max(np.abs(b[:, 0::2] - a)) < 1e-10 and np.max(np.abs(b[:, 1::2] - a)) < 1e-10
    model = build_model(bundled("germanium-fitted"), SMALL_CUTOFF_EV, spin_orbit=True)
    whole = projected_energies(model, np.zeros(3), model.matrix_size, k, 16)
    assert np.max(np.abs(whole - exact_energies(model, k, 16))) < 1e-9
    few = projected_energies(model, np.zeros(3), 40, k, 16)
    assert np.all(few >= exact_energies(model, k, 16) - 1e-9)  # Cauchy interlacing


def test_sweep_of_a_spin_orbit_file_gives_spinor_edges_and_refuses_spinless_masses():
    # source: the band structure of the same file at the same cutoff (the sweep's point must
    # equal a direct calculation), and Kramers pairs counted as two bands (8 valence electrons
    # fill 8 spinor bands: the gap lies between bands 8 and 9)
    from bandpert.errors import InputError
    from bandpert.physics.bands import compute_band_structure
    from bandpert.runs.execution import Engine
    from bandpert.runs.sweep import prepare, run_sweep
    from bandpert.runs.sweep_spec import parse_axis

    material = bundled("silicon-spin-orbit")
    doc = read_toml_document(material.file)
    doc.setdefault("basis", {})["cutoff_eV"] = SMALL_CUTOFF_EV
    axes = (parse_axis("spin_orbit.species.Si.strength_eV=0.0:0.02:2"),)
    spec, _, note = prepare(doc, str(material.file), axes, ("edges", "gaps"), ("Γ",), n_k=12)
    assert spec.lower_band == 8
    result = run_sweep(spec, Engine("serial"), note=note)
    last_doc = copy.deepcopy(doc)
    last_doc["spin_orbit"]["species"]["Si"]["strength_eV"] = 0.02
    direct = compute_band_structure(parse_material(last_doc, "<test>"), n_k=12,
                                    cutoff_eV=SMALL_CUTOFF_EV, check_cutoff=False)
    assert result.n_points == 2 and not result.failures
    last = {name: result.columns[name][-1] for name in ("gap_Γ_eV", "direct_gap_eV", "gap_eV")}
    assert last["gap_eV"] > 0.3  # silicon stays a semiconductor
    assert last["direct_gap_eV"] == pytest.approx(direct.edges.direct_gap_eV, abs=1e-9)
    e = direct.energies_eV[direct.path.label_indices[0]]
    assert last["gap_Γ_eV"] == pytest.approx(e[8] - e[7], abs=1e-9)
    with pytest.raises(InputError, match="sum over states") as info:
        prepare(doc, str(material.file), axes, ("masses",), ("Γ",), n_k=12)
    assert info.value.key == "quantities"


@pytest.mark.parametrize("command", ["bands", "gaps", "fullzone"])
def test_default_commands_run_on_a_fitted_file(command, tmp_path):
    # common practice, no source: the default command on a bundled spin–orbit file succeeds
    # (it used to stop with "the perturbative series expands a spinless H0 + V"), and the bands
    # JSON carries the perturbative bands with their proven bound
    import contextlib
    import io
    import json

    import bandpert.cli.app as cli

    args = [command, "silicon-fitted", "--k-points", "8", "--cutoff-eV", str(SMALL_CUTOFF_EV),
            "--out", str(tmp_path)]
    if command == "fullzone":
        args += ["--basis", "30"]
    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        with pytest.raises(SystemExit) as stop:
            cli.main(args)
    assert stop.value.code in (0, None), stderr.getvalue()
    if command == "bands":
        doc = json.loads((tmp_path / "silicon-fitted-bands.json").read_text())
        pert = doc["results"]["perturbative"]
        assert pert is not None and len(pert["energies_eV"][0]) == 16
