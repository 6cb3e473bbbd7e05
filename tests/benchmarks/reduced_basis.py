"""Benchmark rows of the reduced-basis interpolation and the dense-mesh jobs it serves.

Imported by run.py (``--only-reduced-basis`` runs this section alone). Every figure is a ratio of
two things timed alternately in the same run (run.side_by_side), medians of the repetitions.
"""

from __future__ import annotations

import time
import tracemalloc
from collections.abc import Callable

import numpy as np

from bandpert.crystal.kmesh import reciprocal_mesh
from bandpert.data import find_material
from bandpert.input.material import load_material
from bandpert.physics.bands import default_bands
from bandpert.physics.reduced_basis import (
    ReducedBasisSettings,
    build_reduced_basis,
    interpolated_bands,
)
from bandpert.planewave.cutoff import choose_cutoff
from bandpert.planewave.model import build_k_centred_model
from bandpert.planewave.solver import exact_energies

#: Points per axis of the fine mesh of the interpolated-vs-exact row (its irreducible points).
FINE_MESH = 32


def reduced_basis_rows(reps: int, say: Callable[..., None], side_by_side: Callable
                       ) -> tuple[dict, list[tuple[str, str, str]]]:
    """Interpolated against exact bands on the same fine mesh (silicon), both basis layouts."""
    material = load_material(find_material("silicon"))
    n_bands = default_bands(material)
    cutoff = choose_cutoff(material, n_bands)
    mesh = reciprocal_mesh(material, FINE_MESH)
    k = mesh.k_cart_invA
    centred = build_k_centred_model(material, cutoff)
    exact = exact_energies(centred, k, n_bands)
    results: dict = {}
    rows = []
    layouts = {"local": ReducedBasisSettings(),
               "zone": ReducedBasisSettings(local_radius=0.0, basis_tolerance=3e-3)}
    for name, settings in layouts.items():
        say(f"reduced basis ({name}) vs exact, silicon {FINE_MESH}³ mesh")
        t0 = time.perf_counter()
        model = build_reduced_basis(material, cutoff, n_bands, settings)
        build_s = time.perf_counter() - t0
        pair = side_by_side(lambda: exact_energies(centred, k, n_bands),
                            lambda m=model: m.energies(k), reps)
        t0 = time.perf_counter()
        run = interpolated_bands(material, k, n_bands, cutoff, settings)
        whole_s = time.perf_counter() - t0
        diff = model.energies(k) - exact
        err_max, err_rms = float(np.abs(diff).max()), float(np.sqrt(np.mean(diff**2)))
        results[f"reduced_basis_{name}_silicon"] = {
            "fine_mesh": FINE_MESH, "k_points": len(k), "bands": n_bands,
            "cutoff_eV": cutoff, "fixed_plane_waves": model.fixed_size,
            "k_centred_plane_waves_gamma": centred.size,
            "reduced_sizes_min_mean_max": [int(model.sizes.min()), float(model.sizes.mean()),
                                           int(model.sizes.max())],
            "coarse_points": model.coarse_points, "exact_s": pair["a_s"],
            "interpolated_s": pair["b_s"], "speedup": pair["ratio"], "build_s": build_s,
            "whole_run_s": whole_s, "whole_run_speedup": pair["a_s"] / whole_s,
            "max_error_eV": err_max, "rms_error_eV": err_rms,
            "check_max_error_eV": run.check.max_error_eV,
            "check_points": len(run.check.point_indices)}
        rows.append((f"reduced-basis interpolation / exact bands on the same mesh (silicon, "
                     f"{name} bases, {len(k)} irreducible k of {FINE_MESH}³, {n_bands} bands)",
                     f"{pair['ratio']:.1f}x faster",
                     f"exact {pair['a_s']:.2f} s, interpolated {pair['b_s']:.3f} s "
                     f"(reduced {model.sizes.min()}–{model.sizes.max()} states from "
                     f"{model.fixed_size} plane waves); largest error {err_max * 1e3:.2f} meV, "
                     f"RMS {err_rms * 1e3:.2f} meV on every point; build {build_s:.1f} s, "
                     f"whole checked run {whole_s:.1f} s ({pair['a_s'] / whole_s:.1f}x)"))
    return results, rows


def peak_bytes(f: Callable[[], object]) -> float:
    """Peak traced allocation of one call (tracemalloc, numpy buffers included)."""
    tracemalloc.start()
    try:
        f()
        return float(tracemalloc.get_traced_memory()[1])
    finally:
        tracemalloc.stop()
