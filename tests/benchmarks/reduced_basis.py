"""Benchmark rows of the reduced-basis interpolation and the dense-mesh jobs it serves.

Imported by run.py (``--only-reduced-basis`` runs this section alone); also a script of its own:
``python tests/benchmarks/reduced_basis.py [--spin-orbit] [--dense N]`` prints the chosen rows.
Every ratio is of two things timed alternately in the same run (timing.side_by_side), medians of
the repetitions. The dense-mesh rows are timed once each and state the machine's load average
(``os.getloadavg``) and the process's CPU time beside the wall time: on a shared machine the wall
time alone cannot be read.
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import time
from collections.abc import Callable

import numpy as np

from bandpert.crystal.kmesh import reciprocal_mesh
from bandpert.data import find_material
from bandpert.input.material import load_material
from bandpert.physics.bands import default_bands
from bandpert.physics.optical_spectrum import optical_spectrum
from bandpert.physics.reduced_basis import ReducedBasisSettings, build_reduced_basis
from bandpert.physics.reduced_basis_check import interpolated_bands
from bandpert.planewave.cutoff import choose_cutoff
from bandpert.planewave.model import build_k_centred_model
from bandpert.planewave.solver import exact_energies
from bandpert.runs.execution import Engine
from bandpert.runs.mesh_dos import compute_dos

#: Points per axis of the fine mesh of the interpolated-vs-exact row (its irreducible points).
FINE_MESH = 32

#: Points per axis of the dense DOS and ε2 rows (10⁶ points, the mesh limit).
DENSE_MESH = 100


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


#: Points per axis of the spin–orbit row's fine mesh (its irreducible points).
SPIN_ORBIT_MESH = 12


def spin_orbit_rows(reps: int, say: Callable[..., None], side_by_side: Callable
                    ) -> tuple[dict, list[tuple[str, str, str]]]:
    """Interpolated against exact spinor bands on the same mesh (silicon with spin–orbit)."""
    material = load_material(find_material("silicon-spin-orbit"))
    n_bands = default_bands(material)
    cutoff = choose_cutoff(material.local_spinless(), n_bands // 2)
    k = reciprocal_mesh(material, SPIN_ORBIT_MESH).k_cart_invA
    say(f"reduced basis with spin-orbit vs exact spinor bands, silicon {SPIN_ORBIT_MESH}³ mesh")
    t0 = time.perf_counter()
    model = build_reduced_basis(material, cutoff, n_bands)
    build_s = time.perf_counter() - t0
    pair = side_by_side(lambda: exact_energies(model.fixed, k, n_bands),
                        lambda: model.energies(k), reps)
    diff = model.energies(k) - exact_energies(model.fixed, k, n_bands)
    err_max, err_rms = float(np.abs(diff).max()), float(np.sqrt(np.mean(diff**2)))
    results = {"reduced_basis_spin_orbit_silicon": {
        "fine_mesh": SPIN_ORBIT_MESH, "k_points": len(k), "bands": n_bands, "cutoff_eV": cutoff,
        "fixed_plane_waves": model.fixed_size, "spinor_states": 2 * model.fixed_size,
        "reduced_sizes_min_max": [int(model.sizes.min()), int(model.sizes.max())],
        "exact_s": pair["a_s"], "interpolated_s": pair["b_s"], "speedup": pair["ratio"],
        "build_s": build_s, "max_error_eV": err_max, "rms_error_eV": err_rms}}
    rows = [(f"reduced-basis interpolation / exact spinor bands, same fixed basis (silicon with "
             f"spin-orbit, {len(k)} irreducible k of {SPIN_ORBIT_MESH}³, {n_bands} bands)",
             f"{pair['ratio']:.1f}x faster",
             f"exact {pair['a_s']:.2f} s ({2 * model.fixed_size} spinor states), interpolated "
             f"{pair['b_s']:.3f} s (reduced {model.sizes.min()}–{model.sizes.max()} states, "
             f"H_so projected per k); largest error {err_max * 1e3:.2f} meV, RMS "
             f"{err_rms * 1e3:.2f} meV; build {build_s:.1f} s")]
    return results, rows


def _clock() -> tuple[float, float]:
    return time.perf_counter(), time.process_time()


def dense_mesh_rows(say: Callable[..., None], n_per_axis: int = DENSE_MESH
                    ) -> tuple[dict, list[tuple[str, str, str]]]:
    """Silicon DOS and ε2 on a 10⁶-point mesh through the interpolation (timed once each).

    The exact path is not run at this size (about 22 000 irreducible points at several ms
    each); its time per point is the one of the row above. Peak memory is the process's
    resident high-water mark (``ru_maxrss``) after each job.
    """
    material = load_material(find_material("silicon"))
    results: dict = {}
    rows = []
    say(f"silicon DOS, {n_per_axis}³ mesh, interpolated")
    load_before = os.getloadavg()[0]
    (w0, c0) = _clock()
    dos = compute_dos(material, n_per_axis, interpolation=ReducedBasisSettings(),
                      energy_step_eV=0.01, engine=Engine("serial"))
    (w1, c1) = _clock()
    dos_s, dos_cpu = w1 - w0, c1 - c0
    dos_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**10
    load_dos = os.getloadavg()[0]
    check = dos.interpolation.check
    say(f"silicon ε2, {n_per_axis}³ mesh, interpolated")
    (w0, c0) = _clock()
    spectrum = optical_spectrum(material, n_per_axis)
    (w1, c1) = _clock()
    optics_s, optics_cpu = w1 - w0, c1 - c0
    optics_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**10
    load_optics = os.getloadavg()[0]
    results["dense_mesh_silicon"] = {
        "mesh": n_per_axis, "full_points": dos.mesh.n_full,
        "irreducible_points": len(dos.mesh.k_frac), "dos_s": dos_s, "optics_s": optics_s,
        "dos_cpu_s": dos_cpu, "optics_cpu_s": optics_cpu,
        "load_average_1min": [load_before, load_dos, load_optics],
        "peak_rss_after_dos_MiB": dos_rss, "peak_rss_after_optics_MiB": optics_rss,
        "check_max_error_eV": check.max_error_eV, "check_points": len(check.point_indices),
        "n_eff_interband": spectrum.n_eff_interband, "eps1_zero": float(spectrum.eps1[0]),
        "critical_points_eV": spectrum.critical_points_eV}
    rows.append((f"silicon DOS on a {n_per_axis}³ = {dos.mesh.n_full:.2e}-point mesh "
                 f"(tetrahedra, interpolated, {len(dos.mesh.k_frac)} irreducible k)",
                 f"{dos_s:.0f} s",
                 f"whole job in one process (bases, check at {len(check.point_indices)} points:"
                 f" largest error {check.max_error_eV * 1e3:.2f} meV, DOS, Fermi level); CPU "
                 f"{dos_cpu:.0f} s, load average {load_before:.1f} → {load_dos:.1f}; peak "
                 f"resident memory {dos_rss:.0f} MiB"))
    rows.append((f"silicon ε2 on the same mesh (interpolated, {spectrum.n_bands} bands)",
                 f"{optics_s:.0f} s",
                 f"ε1(0) = {spectrum.eps1[0]:.2f}, n_eff (interband, {spectrum.n_bands} bands) "
                 f"{spectrum.n_eff_interband:.3f}; CPU {optics_cpu:.0f} s, load average "
                 f"{load_optics:.1f}; peak resident memory {optics_rss:.0f} MiB"))
    return results, rows


def main(argv: list[str] | None = None) -> int:
    """Print the chosen rows of this section (see the module docstring)."""
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from timing import side_by_side  # sibling script (the one timing harness)

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=3)
    parser.add_argument("--spin-orbit", action="store_true", help="the spin-orbit row")
    parser.add_argument("--fine", action="store_true", help="the spinless fine-mesh rows")
    parser.add_argument("--dense", type=int, default=0, help="dense-mesh rows at N per axis")
    args = parser.parse_args(argv)

    def say(*a):
        print(*a, file=sys.stderr, flush=True)

    rows = []
    if args.fine:
        rows += reduced_basis_rows(args.reps, say, side_by_side)[1]
    if args.spin_orbit:
        rows += spin_orbit_rows(args.reps, say, side_by_side)[1]
    if args.dense:
        rows += dense_mesh_rows(say, args.dense)[1]
    for what, figure, detail in rows:
        print(f"| {what} | {figure} | {detail} |")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
