"""Timing of the benchmark scripts: two things timed alternately in one run, medians.

Each pair runs alternately (after one warm-up call), so that a busy neighbour on a shared
machine slows both sides alike; the figure quoted is the median of the per-repetition ratios.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable


def side_by_side(a: Callable[[], object], b: Callable[[], object], reps: int,
                 warm_up: bool = True) -> dict:
    """Median times of a and b and the median of the per-repetition ratios t_a / t_b."""
    if warm_up:
        a(), b()
    ta, tb = [], []
    for _ in range(reps):
        t0 = time.perf_counter()
        a()
        t1 = time.perf_counter()
        b()
        t2 = time.perf_counter()
        ta.append(t1 - t0)
        tb.append(t2 - t1)
    return {"a_s": statistics.median(ta), "b_s": statistics.median(tb),
            "ratio": statistics.median(x / y for x, y in zip(ta, tb, strict=True)),
            "reps": reps}


def median_time(f: Callable[[], object], reps: int) -> float:
    f()
    times = []
    for _ in range(reps):
        t0 = time.perf_counter()
        f()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)
