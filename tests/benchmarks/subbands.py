#!/usr/bin/env python3
"""Benchmark rows of the heterostructure subbands; run.py imports :func:`subband_rows`.

Alone (prints its rows only)::

    python3 tests/benchmarks/subbands.py [--reps 3]

Case (issue 19): a 20 nm GaAs well between 10 nm Al0.3Ga0.7As barriers at 0.1 nm spacing
(400 nodes; 3200 unknowns in the eight-band model). Rows: the lowest 10 conduction and 10
valence subbands at k∥ = 0 (eight-band, beside one-band); the in-plane dispersion at 50 k∥
points along each of [100] and [110] (102 solves with the two mass-step points, 3 levels per
side), serially and on a local Dask cluster of 2 workers (the cluster's start-up included:
what ``bandpert subbands --in-plane`` costs), with the machine's load average; the peak
memory of the eight-band solve at 0.1 nm and at 0.05 nm (linear in the grid: the ratio should
be about 2).
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import tracemalloc
from collections.abc import Callable

from timing import median_time

from bandpert.heterostructure import compute_subbands, in_plane_dispersion
from bandpert.input.structure_file import parse_structure
from bandpert.runs.execution import Engine, session
from bandpert.runs.in_plane import in_plane_on_engine

WELL = {"name": "GaAs/Al0.3Ga0.7As 20 nm well", "source": "issue 19 benchmark",
        "layers": [{"alloy": "aluminium-gallium-arsenide", "x": 0.3, "thickness_nm": 10.0},
                   {"material": "gallium-arsenide", "thickness_nm": 20.0},
                   {"alloy": "aluminium-gallium-arsenide", "x": 0.3, "thickness_nm": 10.0}]}


def _peak_bytes(fn) -> int:
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak


def subband_rows(reps: int, say: Callable[..., None]) -> tuple[dict, list]:
    """(results, rows) of the subband solvers on the issue's 20 nm well."""
    say("subbands: 20 nm GaAs/Al0.3Ga0.7As well, 0.1 nm")
    s = parse_structure(WELL, "benchmark")
    t8 = median_time(lambda: compute_subbands(s, 0.1, 10, "eight-band"), reps)
    t1 = median_time(lambda: compute_subbands(s, 0.1, 10, "one-band"), reps)
    load = os.getloadavg()[0]
    td = median_time(lambda: in_plane_dispersion(s, "eight-band", 0.05, 50, 3, 0.1), 1)
    t0 = time.perf_counter()  # one run: the cluster starts and stops inside it
    with session(Engine("local", workers=2)) as runner:
        t1 = time.perf_counter()
        in_plane_on_engine(s, "eight-band", 0.05, 50, 3, 0.1, runner)
        t2 = time.perf_counter()
    te, t_work = time.perf_counter() - t0, t2 - t1
    load_after = os.getloadavg()[0]
    m1 = _peak_bytes(lambda: compute_subbands(s, 0.1, 10, "eight-band"))
    m2 = _peak_bytes(lambda: compute_subbands(s, 0.05, 10, "eight-band"))
    results = {"subbands_20nm_well": {"eight_band_10_levels_s": t8, "one_band_10_levels_s": t1,
                                      "in_plane_50_points_s": td,
                                      "in_plane_50_points_engine_2_workers_s": te,
                                      "in_plane_50_points_engine_work_only_s": t_work,
                                      "load_average_1min": [load, load_after],
                                      "peak_bytes_0p1nm": m1,
                                      "peak_bytes_0p05nm": m2}}
    rows = [("eight-band subbands at k∥ = 0, 20 nm well, 0.1 nm (10 per side; issue: < 1 s)",
             f"{t8:.2f} s", f"one-band, same structure: {1e3 * t1:.1f} ms"),
            ("eight-band in-plane dispersion, 50 k∥ along [100] and 50 along [110]: serial vs "
             "local Dask, 2 workers (issue: < 20 s on 2 cores)", f"{td:.1f} s vs {te:.1f} s",
             f"3 levels per side; cluster start-up and shut-down included ({t_work:.1f} s of "
             f"it the points themselves); load average {load:.1f} → {load_after:.1f}"),
            ("peak memory of the eight-band solve, 0.05 nm / 0.1 nm grid", f"{m2 / m1:.2f}x",
             f"{m1 / 1e6:.1f} MB at 0.1 nm, {m2 / 1e6:.1f} MB at 0.05 nm (linear: about 2x)")]
    return results, rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=3)
    args = parser.parse_args(argv)
    _, rows = subband_rows(args.reps, lambda *a: print(*a, file=sys.stderr))
    for what, figure, detail in rows:
        print(f"| {what} | {figure} | {detail} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
