#!/usr/bin/env python3
"""Benchmark rows of the iterative solver against LAPACK; run.py imports :func:`iterative_rows`.

Alone (prints its rows and writes nothing)::

    python3 tests/benchmarks/iterative.py [--reps 3] [--sizes 500,1000,1500,3000]

Case: silicon (materials/planewave/silicon.toml) at cutoffs giving about 500, 1000, 1500 and
3000 plane waves at Γ, 16 bands, the first ``N_K`` points of the standard path sampled at its
default density (200 points), each k in its own basis ħ²|k+G|²/2m0 ≤ cutoff. The same
``exact_energies`` call with ``solver="dense"`` (LAPACK ?syevr per k, one BLAS thread) and
``solver="iterative"`` (warm-started LOBPCG, V by FFT) run alternately (timing.side_by_side);
the largest |ΔE| between them, and the LOBPCG steps with and without the warm start, are
reported beside the times.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable

import numpy as np
from timing import side_by_side

from bandpert.crystal.lattice import sample_path, standard_path
from bandpert.data import MATERIALS_DIR
from bandpert.input.material import load_material
from bandpert.planewave.iterative import iterative_energies
from bandpert.planewave.model import build_k_centred_model
from bandpert.planewave.solver import exact_energies, single_blas_thread

#: Silicon cutoffs (eV): 531, 725, 1037, 1471 and 3071 plane waves at Γ.
CUTOFFS_EV = {500: 305.0, 750: 400.0, 1000: 510.0, 1500: 660.0, 3000: 1040.0}
N_BANDS = 16
N_K = 12


def iterative_rows(reps: int, say: Callable[..., None],
                   sizes: tuple[int, ...] = (500, 750, 1000, 1500, 3000)) -> tuple[dict, list]:
    """(results, rows): iterative / dense time ratios at several basis sizes."""
    material = load_material(MATERIALS_DIR / "planewave" / "silicon.toml")
    results: dict = {"iterative_vs_dense": []}
    rows = []
    for size in sizes:
        model = build_k_centred_model(material, CUTOFFS_EV[size])
        points, legs = standard_path(material)
        k = sample_path(model.reciprocal_invA, points, legs, 200).k_cart_invA[:N_K]
        say(f"iterative vs dense: silicon, {model.size} plane waves, {len(k)} k")
        dense = exact_energies(model, k, N_BANDS, solver="dense")
        with single_blas_thread():
            warm = iterative_energies(model, k, N_BANDS)
            cold = iterative_energies(model, k, N_BANDS, warm_start=False)
        pair = side_by_side(lambda m=model, k=k: exact_energies(m, k, N_BANDS, solver="dense"),
                            lambda m=model, k=k: exact_energies(m, k, N_BANDS,
                                                                solver="iterative"),
                            reps if size < 3000 else max(1, reps - 1), warm_up=size < 3000)
        err = float(np.max(np.abs(warm.energies_eV - dense)))
        entry = {"basis_size": model.size, "cutoff_eV": CUTOFFS_EV[size], "k_points": len(k),
                 "bands": N_BANDS, "dense_s": pair["a_s"], "iterative_s": pair["b_s"],
                 "dense_over_iterative": pair["ratio"], "max_abs_diff_eV": err,
                 "steps_warm_mean": float(warm.iterations.mean()),
                 "steps_fresh_mean": float(cold.iterations.mean()),
                 "dense_fallbacks": warm.dense_fallbacks, "reps": pair["reps"]}
        results["iterative_vs_dense"].append(entry)
        say(f"  {entry}")
        rows.append((f"iterative / dense speed (silicon, {model.size} PW, {len(k)} k, "
                     f"{N_BANDS} bands)", f"{pair['ratio']:.2f}x",
                     f"dense {pair['a_s']:.2f} s, iterative {pair['b_s']:.2f} s; max |ΔE| "
                     f"{err:.1e} eV; LOBPCG steps per k {warm.iterations.mean():.1f} warm, "
                     f"{cold.iterations.mean():.1f} fresh"))
    return results, rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=3)
    parser.add_argument("--sizes", default="500,750,1000,1500,3000")
    args = parser.parse_args(argv)
    sizes = tuple(int(s) for s in args.sizes.split(","))
    _, rows = iterative_rows(args.reps, lambda *a: print(*a, file=sys.stderr, flush=True),
                             sizes)
    for what, figure, detail in rows:
        print(f"| {what} | {figure} | {detail} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
