#!/usr/bin/env python3
"""Benchmark rows of the spin–orbit (spinor) exact path; run.py imports :func:`spin_orbit_rows`.

Alone (prints its rows only)::

    python3 tests/benchmarks/spin_orbit.py [--reps 3]

Case: silicon with spin–orbit coupling (materials/planewave/silicon-spin-orbit.toml) at the
default cutoff of its spinless file, 200 k-points along the standard path, the default (spinor)
number of bands, the basis centred on each k. The bare loop calls LAPACK's ``zheevr`` (through
scipy.linalg.eigh, one BLAS thread) on the same matrices, built before its clock starts in
chunks of 25 k-points (200 matrices of 520 × 520 complex would hold 0.9 GB at once).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from collections.abc import Callable
from dataclasses import replace

import numpy as np
import scipy.linalg
from threadpoolctl import threadpool_limits
from timing import side_by_side  # sibling script

from bandpert.crystal.lattice import sample_path, standard_path
from bandpert.data import MATERIALS_DIR
from bandpert.input.material import load_material
from bandpert.physics.bands import default_bands
from bandpert.planewave.cutoff import converged_cutoff
from bandpert.planewave.model import build_k_centred_model
from bandpert.planewave.solver import exact_energies, per_k_hamiltonians

N_K = 200
CHUNK = 25


def spin_orbit_rows(reps: int, say: Callable[..., None]) -> tuple[dict, list]:
    """(results, rows) of the spinor exact path against a bare zheevr loop."""
    say("spin-orbit exact path: silicon-spin-orbit")
    material = load_material(MATERIALS_DIR / "planewave" / "silicon-spin-orbit.toml")
    spinless = material.without_spin_orbit()
    cutoff = converged_cutoff(spinless, default_bands(spinless))
    model = build_k_centred_model(material, cutoff)
    nb = default_bands(material)
    points, legs = standard_path(material)
    k = sample_path(model.reciprocal_invA, points, legs, N_K).k_cart_invA
    half = (nb + 1) // 2

    def tool():
        return exact_energies(model, k, nb)

    def build():
        for _ in per_k_hamiltonians(model, k, half):
            pass

    def bare() -> float:
        """Seconds inside LAPACK only (matrices built off the clock, chunk by chunk)."""
        spent = 0.0
        with threadpool_limits(1, user_api="blas"):
            for start in range(0, len(k), CHUNK):
                hs = list(per_k_hamiltonians(model, k[start:start + CHUNK], half))
                t0 = time.perf_counter()
                for h in hs:
                    scipy.linalg.eigh(h, eigvals_only=True, subset_by_index=(0, nb - 1),
                                      driver="evr", check_finite=False, overwrite_a=True)
                spent += time.perf_counter() - t0
        return spent

    tool(), bare()
    t_tool, t_bare, t_build = [], [], []
    for _ in range(reps):
        t0 = time.perf_counter()
        tool()
        t_tool.append(time.perf_counter() - t0)
        t_bare.append(bare())
        t0 = time.perf_counter()
        with threadpool_limits(1, user_api="blas"):
            build()
        t_build.append(time.perf_counter() - t0)
    ratio = statistics.median(a / b for a, b in zip(t_tool, t_bare, strict=True))
    share = statistics.median(b / (a - b) for a, b in zip(t_tool, t_build, strict=True))
    sizes = [h.shape[0] for h in per_k_hamiltonians(model, k[:: max(1, N_K // 20)], half)]
    results = {"spin_orbit_silicon": {
        "k_points": len(k), "bands": nb, "gamma_basis_size": model.size,
        "matrix_sizes_min_max": [min(sizes), max(sizes)], "tool_s": statistics.median(t_tool),
        "bare_zheevr_s": statistics.median(t_bare), "tool_over_bare": ratio,
        "build_s": statistics.median(t_build), "build_over_diagonalisation": share}}
    rows = [(f"exact path with spin-orbit / bare zheevr loop on the same matrices (silicon, "
             f"{min(sizes)}–{max(sizes)} spinor states, {len(k)} k, {nb} bands)",
             f"{ratio:.2f}x",
             f"tool {statistics.median(t_tool):.2f} s, bare zheevr {statistics.median(t_bare):.2f}"
             f" s (1 BLAS thread, matrices built off the clock)"),
            ("building H(k) with spin-orbit / diagonalising it (silicon, 200 k)",
             f"{100 * share:.0f} %",
             f"build {statistics.median(t_build):.2f} s of the tool's "
             f"{statistics.median(t_tool):.2f} s (gather V and S_s, K × K', spinor blocks)")]
    return results, rows


#: k-points of the energy-dependent well's row (germanium-fitted, Γ–L).
SLOPE_K = 40


def energy_slope_rows(reps: int, say: Callable[..., None]) -> tuple[dict, list]:
    """(results, rows): exact bands of germanium-fitted (l = 0 depth following the energy,
    S^{-1/2} H_c S^{-1/2} per k) against the same file with the slope set to 0, side by side."""
    say("energy-dependent well: germanium-fitted")
    material = load_material(MATERIALS_DIR / "planewave" / "germanium-fitted.toml")
    constant = replace(material, nonlocal_terms=replace(material.nonlocal_terms,
                                                        energy_slopes={}))
    b = build_k_centred_model(material, material.cutoff_eV).reciprocal_invA
    k = np.linspace(0.0, 1.0, SLOPE_K)[:, None] * (np.array([0.5, 0.5, 0.5]) @ b)
    models = [build_k_centred_model(m, material.cutoff_eV) for m in (material, constant)]
    with threadpool_limits(1, user_api="blas"):
        timed = side_by_side(lambda: exact_energies(models[0], k, 16),
                             lambda: exact_energies(models[1], k, 16), reps)
    results = {"energy_dependent_well_germanium": {
        "k_points": SLOPE_K, "cutoff_eV": material.cutoff_eV, "with_slope_s": timed["a_s"],
        "slope_removed_s": timed["b_s"], "ratio": timed["ratio"]}}
    rows = [(f"exact bands with the energy-dependent l = 0 well / the same file with its slope "
             f"removed (germanium-fitted, {material.cutoff_eV:g} eV, {SLOPE_K} k along Γ–L)",
             f"{timed['ratio']:.2f}x",
             f"{timed['a_s']:.2f} s against {timed['b_s']:.2f} s (1 BLAS thread; the metric "
             "S^-1/2 from a factored well and an O(r n^2) product per k)")]
    return results, rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=3)
    args = parser.parse_args(argv)
    results, rows = spin_orbit_rows(args.reps, lambda *a: print(*a, file=sys.stderr))
    slope_results, slope_rows = energy_slope_rows(args.reps, lambda *a: print(*a, file=sys.stderr))
    results.update(slope_results)
    rows += slope_rows
    for what, figure, detail in rows:
        print(f"| {what} | {figure} | {detail} |")
    print(np.round(results["spin_orbit_silicon"]["tool_over_bare"], 3), file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
