#!/usr/bin/env python3
"""Benchmark row of the symmetry labels; run.py imports :func:`symmetry_rows`.

Alone (prints its row only)::

    python3 tests/benchmarks/symmetry_labels.py [--reps 3]

Case: silicon (materials/planewave/silicon.toml) at its default cutoff, 200 k-points, default
bands and perturbative settings, as ``bandpert bands`` computes them; against the same plus
the labels and van Hove types of every labelled point of the path
(:func:`bandpert.physics.van_hove.label_and_classify`: one full diagonalisation per point in the
k-centred basis, sharing the band structure's V table, as the command does). Target (issue): at
most 1.2x.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
import warnings
from collections.abc import Callable

from timing import side_by_side

from bandpert.crystal.lattice import standard_path
from bandpert.data import MATERIALS_DIR
from bandpert.input.material import load_material
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.perturbative_bands import PerturbationSettings
from bandpert.physics.van_hove import label_and_classify

N_K = 200


def symmetry_rows(reps: int, say: Callable[..., None]) -> tuple[dict, list]:
    """(results, rows): ``bands`` with the labels and critical points of every labelled point
    against without."""
    material = load_material(MATERIALS_DIR / "planewave" / "silicon.toml")
    points = standard_path(material)[0]
    timed: dict = {}

    def bands():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return compute_band_structure(material, n_k=N_K,
                                          perturbation=PerturbationSettings())

    def labelled():
        bs = bands()
        t0 = time.perf_counter()
        label_and_classify(material, bs.k_centred.cutoff_eV, points, bs.n_bands,
                           model=bs.k_centred)
        timed.setdefault("labels_s", []).append(time.perf_counter() - t0)

    say("symmetry labels: silicon")
    pair = side_by_side(labelled, bands, reps)
    labels_s = statistics.median(timed["labels_s"])
    results = {"bands_with_labels_s": pair["a_s"], "bands_s": pair["b_s"],
               "ratio": pair["ratio"], "labels_alone_s": labels_s, "points": len(points),
               "k_points": N_K, "reps": reps}
    rows = [(f"bands with symmetry labels and critical points at the {len(points)} labelled "
             f"points / bands (silicon, {N_K} k, exact + perturbative)", f"{pair['ratio']:.2f}x",
             f"with labels and critical points {pair['a_s']:.2f} s, without {pair['b_s']:.2f} s; "
             f"labels and critical points alone {labels_s:.2f} s (target ≤ 1.2x)")]
    return results, rows


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=3)
    args = parser.parse_args()
    _, out = symmetry_rows(args.reps, lambda *a: print(*a, file=sys.stderr, flush=True))
    for what, figure, detail in out:
        print(f"| {what} | {figure} | {detail} |")
