#!/usr/bin/env python3
"""Benchmark rows: the batched perturbative driver against ``scipy.linalg.eigh``, side by side.

Synthetic batch: free-electron-like spectra ``|k + G|²`` (simple-cubic G, k along a line) and a
weak dense random Hermitian ``V``, real and complex; no crystal is involved, so the rows time
:func:`bandpert.perturbation.perturbative_levels` alone. Used by ``tests/benchmarks/run.py``
(one row per variant); also runs on its own::

    python3 tests/benchmarks/perturbation_driver.py [--reps 5]
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable

import numpy as np
import scipy.linalg
from timing import side_by_side

from bandpert.perturbation import TREATMENT_SUBSPACE, perturbative_levels

VARIANTS: tuple[dict, ...] = ({}, {"order": 3}, {"estimate_error": False},
                              {"estimate_error": False, "indirect": False})


def synthetic_batch(n: int = 250, n_k: int = 200) -> np.ndarray:
    """Unperturbed spectra |k + G|², shape (n_k, n), for the n shortest simple-cubic G."""
    grid = np.arange(-4, 5)
    gvec = np.array(np.meshgrid(grid, grid, grid, indexing="ij")).reshape(3, -1).T
    gvec = gvec[np.argsort(np.einsum("ij,ij->i", gvec, gvec), kind="stable")][:n]
    ks = np.linspace(0.0, 0.5, n_k)[:, None] * np.array([1.0, 0.7, 0.3])
    return np.einsum("kgi,kgi->kg", ks[:, None, :] + gvec, ks[:, None, :] + gvec)


def driver_rows(reps: int, say: Callable[..., None] = lambda *a: None, n: int = 250,
                n_k: int = 200, n_levels: int = 8, strength: float = 0.05,
                ) -> tuple[dict, list[tuple[str, str, str]]]:
    """Results and table rows (what, figure, detail) of eigh / perturbative_levels."""
    rng = np.random.default_rng(0)
    e0 = synthetic_batch(n, n_k)
    results: dict = {}
    rows = []
    for kind in ("real", "complex"):
        x = rng.normal(size=(n, n))
        if kind == "complex":
            x = x + 1j * rng.normal(size=(n, n))
        v = strength * (x + x.conj().T) / 2.0
        eigh = lambda v=v: [scipy.linalg.eigh(np.diag(r) + v, eigvals_only=True) for r in e0]
        exact = np.array([np.linalg.eigvalsh(np.diag(r) + v)[:n_levels] for r in e0])
        for kw in VARIANTS:
            say(f"perturbative_levels {kw or 'default'} vs eigh, {kind} V")
            pair = side_by_side(eigh, lambda v=v, kw=kw: perturbative_levels(e0, v, n_levels, **kw),
                              reps)
            res = perturbative_levels(e0, v, n_levels, **kw)
            err = np.abs(res.energies - exact)
            with_estimate = kw.get("estimate_error", True)
            cover = float(np.mean(err <= res.error_estimate + 1e-12)) if with_estimate else None
            label = ", ".join(f"{k}={val}" for k, val in kw.items()) or "defaults"
            results[f"driver_{kind}_{label}"] = {
                "n": n, "n_k": n_k, "n_levels": n_levels, "strength": strength,
                "eigh_s": pair["a_s"], "perturbative_s": pair["b_s"], "speed_ratio": pair["ratio"],
                "subspace_fraction": float(np.mean(res.treatment == TREATMENT_SUBSPACE)),
                "max_error": float(err.max()), "estimate_coverage": cover}
            rows.append((f"perturbative_levels ({label}) / eigh per row, synthetic {kind} V, "
                         f"n = {n}, {n_k} rows", f"{pair['ratio']:.1f}x faster",
                         f"eigh {pair['a_s']:.3f} s, driver {pair['b_s']:.3f} s; max |error| "
                         f"{err.max():.1e}, estimate covers "
                         + (f"{cover:.3f}" if cover is not None else "n/a")))
    return results, rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=5, help="repetitions per pair (default 5)")
    args = parser.parse_args(argv)
    _, rows = driver_rows(args.reps, lambda *a: print(*a, file=sys.stderr, flush=True))
    print("| what | figure | detail |")
    print("|---|---|---|")
    for what, figure, detail in rows:
        print(f"| {what} | {figure} | {detail} |")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
