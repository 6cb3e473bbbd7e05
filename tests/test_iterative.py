"""The iterative solver (warm-started LOBPCG, potential by FFT) against LAPACK on the same bases."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import MATERIALS, bundled
from hypothesis import given, settings
from hypothesis import strategies as st
from test_cli import assert_user_error, run

from bandpert.crystal.lattice import sample_path, standard_path
from bandpert.errors import InputError
from bandpert.planewave.fft_apply import material_fft_potential, matrix_fft_potential
from bandpert.planewave.iterative import iterative_energies, iterative_states
from bandpert.planewave.model import build_k_centred_model, centred_model
from bandpert.planewave.solver import ITERATIVE_FROM, choose_solver, exact_energies, exact_states

SILICON_500_EV = 320.0  # 531 plane waves at Γ
SILICON_1500_EV = 660.0  # about 1500 plane waves at Γ


def path_points(material, model, n_k: int) -> np.ndarray:
    points, legs = standard_path(material)
    return sample_path(model.reciprocal_invA, points, legs, n_k).k_cart_invA


@pytest.fixture(scope="module")
def silicon_500():
    material = bundled("silicon")
    model = build_k_centred_model(material, SILICON_500_EV)
    return material, model


# ---------------------------------------------------------------------------------------------
# V ψ by FFT
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", ["silicon", "gallium-arsenide", "aluminium", "square-demo",
                                  "cosine-chain"])
def test_fft_product_equals_the_dense_matrix_product(name):
    # An exact identity (circular convolution on a grid that folds no needed difference
    # together; common practice, no source): V ψ by FFT equals the dense V(G_i − G_j) ψ to
    # rounding, for real and complex vectors, in 1D, 2D and 3D, centro- and non-centrosymmetric.
    material = bundled(name)
    dim = material.dimension
    cutoff = {1: 400.0, 2: 150.0, 3: 250.0}[dim]
    model = build_k_centred_model(material, cutoff)
    cand, flat, table, origin = model.candidates(0.3)
    fft = material_fft_potential(material, np.max(np.abs(cand.miller), axis=0))
    rng = np.random.default_rng(1)
    sel = np.sort(rng.choice(len(flat), size=min(len(flat), 300), replace=False))
    v = table[origin + flat[sel][:, None] - flat[sel][None, :]]
    x = rng.standard_normal((len(sel), 5)) + 1j * rng.standard_normal((len(sel), 5))
    x /= np.linalg.norm(x, axis=0)
    index = fft.grid_index(cand.miller[sel])
    assert np.max(np.abs(fft.apply(x, index) - v @ x)) < 1e-12
    if not np.iscomplexobj(v):
        xr = x.real.copy()  # the packed real path (two real columns per complex transform)
        assert np.max(np.abs(fft.apply(xr, index) - v @ xr)) < 1e-12
    # the grid is the small one of a short-ranged potential: N_i ≥ 2M_i + R_i + 1, R_i ≤ 2M_i
    assert np.all(np.array(fft.shape) <= 4 * np.max(np.abs(cand.miller), axis=0) + 8)


@settings(max_examples=8, deadline=None)
@given(st.lists(st.floats(-0.5, 0.5), min_size=3, max_size=3))
def test_fft_product_of_a_fixed_basis_model(k_frac):
    # Same identity (common practice, no source) for a basis centred on any k, the grid built
    # from the dense matrix itself.
    material = bundled("gallium-arsenide")
    b = build_k_centred_model(material, 120.0).reciprocal_invA
    model = centred_model(material, 120.0, np.array(k_frac) @ b)
    fft = matrix_fft_potential(model.basis.miller, model.potential_eV)
    x = np.random.default_rng(2).standard_normal((model.size, 3)) * (1 + 0.5j)
    got = fft.apply(x, fft.grid_index(model.basis.miller))
    assert np.max(np.abs(got - model.potential_eV @ x)) < 1e-12


# ---------------------------------------------------------------------------------------------
# eigenvalues against LAPACK
# ---------------------------------------------------------------------------------------------

def test_iterative_equals_dense_at_500_plane_waves(silicon_500):
    # Reference: LAPACK's ?syevr on the same k-centred matrices (a reference library).
    material, model = silicon_500
    assert 500 <= model.size <= 600
    k = path_points(material, model, 16)
    dense = exact_energies(model, k, 8, solver="dense")
    run_ = iterative_energies(model, k, 8)
    assert np.max(np.abs(run_.energies_eV - dense)) < 1e-8
    assert run_.dense_fallbacks == 0
    assert np.all(run_.residual_eV <= 1e-6)


def test_iterative_equals_dense_near_1500_plane_waves():
    # Reference: LAPACK's ?syevr on the same matrices; 16 bands, four k-points of the path.
    material = bundled("silicon")
    model = build_k_centred_model(material, SILICON_1500_EV)
    assert 1400 <= model.size <= 1700
    k = path_points(material, model, 4)[:4]
    dense = exact_energies(model, k, 16, solver="dense")
    assert np.max(np.abs(exact_energies(model, k, 16) - dense)) < 1e-8  # auto: iterative


def test_iterative_equals_dense_for_a_metal_and_a_complex_potential():
    # Reference: LAPACK (?syevr / ?heevr) on the same matrices; aluminium (nearly free
    # electrons, many near-degenerate levels) and GaAs (complex Hermitian H).
    for name, cutoff, n in (("aluminium", 500.0, 6), ("gallium-arsenide", 300.0, 8)):
        material = bundled(name)
        model = build_k_centred_model(material, cutoff)
        k = path_points(material, model, 10)
        dense = exact_energies(model, k, n, solver="dense")
        got = exact_energies(model, k, n, solver="iterative")
        assert np.max(np.abs(got - dense)) < 1e-8, name


def test_gamma25_triplet_converges_as_a_set(silicon_500):
    # The top valence level of silicon at Γ is the threefold Γ25′ (Cohen & Bergstresser,
    # Phys. Rev. 141, 789 (1966), Fig. 2; its dimension from Bouckaert, Smoluchowski & Wigner,
    # Phys. Rev. 50, 58 (1936)). The three iterative vectors span LAPACK's eigenspace: the
    # projectors agree, whatever basis of the triplet each solver picks.
    material, _ = silicon_500
    model = centred_model(material, SILICON_500_EV, np.zeros(3))
    e_it, x_it = iterative_states(model, np.zeros(3), 8)
    e_la, x_la = exact_states(model, np.zeros(3), 8)
    assert np.max(np.abs(e_it - e_la)) < 1e-8
    triplet = slice(1, 4)
    assert np.ptp(e_la[triplet]) < 1e-9 < e_la[4] - e_la[3]
    p_it = x_it[:, triplet] @ x_it[:, triplet].conj().T
    p_la = x_la[:, triplet] @ x_la[:, triplet].conj().T
    assert np.linalg.norm(p_it - p_la, 2) < 1e-6


def test_warm_start_takes_fewer_steps_along_a_path(silicon_500):
    # Measured, not sourced: along silicon's path at the default density (200 points; here
    # its first 40, from Γ) the vectors of the previous k start each k in fewer LOBPCG steps
    # than the restricted-basis guess alone (241 against 379 when written).
    material, model = silicon_500
    k = path_points(material, model, 200)[:40]
    warm = iterative_energies(model, k, 8)
    cold = iterative_energies(model, k, 8, warm_start=False)
    assert np.max(np.abs(warm.energies_eV - cold.energies_eV)) < 1e-8
    assert warm.iterations.sum() < 0.8 * cold.iterations.sum()


# ---------------------------------------------------------------------------------------------
# the choice of solver
# ---------------------------------------------------------------------------------------------

def test_auto_choice_follows_the_basis_size_and_the_model():
    silicon = bundled("silicon")
    small = build_k_centred_model(silicon, 200.0)
    large = build_k_centred_model(silicon, SILICON_1500_EV)
    assert small.size < ITERATIVE_FROM <= large.size
    assert choose_solver(small, 8) == "dense"
    assert choose_solver(large, 8) == "iterative"
    assert choose_solver(large, 8, "dense") == "dense"
    assert choose_solver(large, large.size // 2) == "dense"  # a block too wide for LOBPCG
    spin = build_k_centred_model(bundled("silicon-spin-orbit"), 200.0)
    assert choose_solver(spin, 16) == "dense"
    with pytest.raises(InputError, match="local spinless"):
        choose_solver(spin, 16, "iterative")
    with pytest.raises(InputError, match="unknown solver"):
        choose_solver(small, 8, "fastest")


def test_bands_solver_flag_and_json(tmp_path):
    # Reference: the same command with LAPACK; the JSON names the solver used.
    base = ["bands", str(MATERIALS / "silicon.toml"), "--cutoff-eV", str(SILICON_500_EV),
            "--k-points", "12", "--exact-only", "--bands", "8"]
    docs = {}
    for solver in ("iterative", "dense"):
        out = tmp_path / solver
        code, _, err = run([*base, "--solver", solver, "--out", str(out)])
        assert code == 0, err
        docs[solver] = json.loads((out / "silicon-exact-bands.json").read_text())
        assert docs[solver]["settings"]["solver"] == solver
    diff = (np.array(docs["iterative"]["results"]["energies_absolute_eV"])
            - np.array(docs["dense"]["results"]["energies_absolute_eV"]))
    assert np.max(np.abs(diff)) < 1e-8


@pytest.mark.parametrize(("name", "solver", "fragment"), [
    ("silicon", "fastest", "--solver"),
    ("silicon-spin-orbit", "iterative", "--solver"),
])
def test_bands_solver_refusals(name, solver, fragment, tmp_path):
    out = tmp_path / "out"
    code, _, err = run(["bands", str(MATERIALS / f"{name}.toml"), "--solver", solver,
                        "--out", str(out), "--k-points", "5"])
    assert_user_error(code, err, fragment)
    assert not out.exists() or not any(out.iterdir())
