#!/usr/bin/env python3
"""Honesty and coverage of the trust mark over a family of crystals and settings, in one run.

Run as a plain script (pytest does not collect it)::

    python3 tests/benchmarks/honesty.py [--k-points 40] [--orders 1,2,3,4,5,6]

For every crystal (bundled silicon, germanium, gallium arsenide, aluminium, the cosine chain;
a bcc metal and a 2D honeycomb crystal defined below), potential scale, coupling threshold and
order it computes the perturbative bands and the exact ones on the same H(k) and prints, per
setting, the share of (band, k) points marked trustworthy, the share of trusted points whose
true error exceeds the tolerance and the largest true error on trusted points over the
tolerance. "proven bound" is the present rule (``error_bound_eV`` < tolerance); "estimate"
is the earlier rule (two-more-orders estimate < tolerance and coupling ratio ≤ threshold),
recomputed from the fields that are still reported, so both columns come from the same run.
The tests (tests/test_trust_family.py) run a seeded sample of the same family.
"""

from __future__ import annotations

import argparse
import itertools
import time
from dataclasses import dataclass

import numpy as np

from bandpert.crystal.lattice import sample_path, standard_path
from bandpert.input.material import Material, load_material, parse_material
from bandpert.physics.bands import default_bands, exact_energies
from bandpert.physics.perturbative_bands import PerturbationSettings, perturbative_bands
from bandpert.planewave.model import PlaneWaveModel, build_model

TOLERANCE_EV = 0.005
THRESHOLDS = (0.05, 0.1, 0.25, 0.45)
SCALES = (0.25, 0.5, 1.0, 1.5)

#: A bcc nearly-free-electron metal of our own (invented form factors, one atom per cell).
BCC = {"name": "bcc test metal", "source": "invented for the honesty family",
       "lattice": {"type": "bcc", "a_A": 4.29}, "atoms": [{"species": "M", "position": [0, 0, 0]}],
       "potential": {"form": "per-species", "unit": "eV", "shells": [2, 4],
                     "species": {"M": [0.6, 0.3]}},
       "electrons": {"valence": 1}}

#: A 2D honeycomb crystal of our own (two atoms, invented form factors).
HONEYCOMB = {"name": "honeycomb test crystal", "source": "invented for the honesty family",
             "lattice": {"type": "hexagonal-2d", "a_A": 2.46},
             "atoms": [{"species": "C", "position": [1 / 3, 2 / 3]},
                       {"species": "C", "position": [2 / 3, 1 / 3]}],
             "potential": {"form": "fourier", "unit": "eV", "coefficients": [
                 {"miller": [1, 0], "value": -1.2}, {"miller": [0, 1], "value": -1.2},
                 {"miller": [1, 1], "value": -1.2}, {"miller": [1, -1], "value": 0.8},
                 {"miller": [2, 1], "value": 0.8}, {"miller": [1, 2], "value": 0.8}]},
             "basis": {"bands": 6}}

#: Crystal name -> (loader, cutoff in eV used for the family).
CRYSTALS: dict[str, tuple[str | dict, float]] = {
    "silicon": ("silicon", 110.0),
    "germanium": ("germanium", 110.0),
    "gallium-arsenide": ("gallium-arsenide", 110.0),
    "aluminium": ("aluminium", 160.0),
    "cosine-chain": ("cosine-chain", 200.0),
    "bcc": (BCC, 120.0),
    "honeycomb": (HONEYCOMB, 250.0),
}


def crystal(name: str) -> Material:
    """A crystal of the family by name."""
    spec = CRYSTALS[name][0]
    if isinstance(spec, str):
        return load_material(spec)  # a bundled material by name
    return parse_material(spec, f"<{name}>")


@dataclass(frozen=True)
class Outcome:
    """Trust statistics of one case: arrays over (k, band) points."""

    error_eV: np.ndarray
    bound_eV: np.ndarray
    trusted_bound: np.ndarray
    trusted_estimate: np.ndarray


def run_case(name: str, scale: float, threshold: float, order: int, n_k: int,
             cutoff_eV: float | None = None) -> Outcome:
    """Perturbative against exact bands for one crystal and setting."""
    material = crystal(name)
    model = build_model(material, cutoff_eV or CRYSTALS[name][1])
    model = PlaneWaveModel(model.basis, model.reciprocal_invA, model.potential_eV * scale)
    points, legs = standard_path(material)
    k = sample_path(model.reciprocal_invA, points, legs, n_k).k_cart_invA
    nb = default_bands(material)
    s = PerturbationSettings(order=order, coupling_threshold=threshold,
                             tolerance_eV=TOLERANCE_EV, radius_points=0)
    pb = perturbative_bands(model, k, nb, s)
    err = np.abs(pb.energies_eV - exact_energies(model, k, nb))
    old = (pb.error_estimate_eV < TOLERANCE_EV) & (pb.max_coupling_ratio <= threshold)
    return Outcome(err, pb.error_bound_eV, pb.trustworthy, old)


def summary(err: np.ndarray, trusted: np.ndarray) -> tuple[float, float, float]:
    """(trusted %, % of trusted over the tolerance, largest error on trusted / tolerance)."""
    n = trusted.sum()
    over = 100.0 * np.sum(err[trusted] > TOLERANCE_EV) / n if n else 0.0
    worst = err[trusted].max() / TOLERANCE_EV if n else 0.0
    return 100.0 * trusted.mean(), over, worst


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--k-points", type=int, default=40)
    parser.add_argument("--orders", default="1,2,3,4,5,6")
    args = parser.parse_args()
    orders = tuple(int(o) for o in args.orders.split(","))
    t0 = time.perf_counter()
    rows: dict[tuple, Outcome] = {}
    for name, scale, thr, order in itertools.product(CRYSTALS, SCALES, THRESHOLDS, orders):
        rows[name, scale, thr, order] = run_case(name, scale, thr, order, args.k_points)
    print(f"{len(rows)} cases, {args.k_points} k-points each, tolerance "
          f"{TOLERANCE_EV * 1e3:g} meV, {time.perf_counter() - t0:.0f} s\n")
    print("| setting | cases | proven bound: trusted % | over tol. % | max err/tol "
          "| estimate: trusted % | over tol. % | max err/tol |")
    print("|---|---|---|---|---|---|---|---|")
    for axis, values in (("crystal", CRYSTALS), ("scale", SCALES), ("threshold", THRESHOLDS),
                         ("order", orders)):
        pos = ("crystal", "scale", "threshold", "order").index(axis)
        for value in values:
            sel = [o for key, o in rows.items() if key[pos] == value]
            err = np.concatenate([o.error_eV.ravel() for o in sel])
            new = summary(err, np.concatenate([o.trusted_bound.ravel() for o in sel]))
            old = summary(err, np.concatenate([o.trusted_estimate.ravel() for o in sel]))
            print(f"| {axis} {value} | {len(sel)} | {new[0]:.1f} | {new[1]:.2f} | {new[2]:.2f} "
                  f"| {old[0]:.1f} | {old[1]:.2f} | {old[2]:.2f} |")
    err = np.concatenate([o.error_eV.ravel() for o in rows.values()])
    new = summary(err, np.concatenate([o.trusted_bound.ravel() for o in rows.values()]))
    old = summary(err, np.concatenate([o.trusted_estimate.ravel() for o in rows.values()]))
    print(f"| all | {len(rows)} | {new[0]:.1f} | {new[1]:.2f} | {new[2]:.2f} | {old[0]:.1f} "
          f"| {old[1]:.2f} | {old[2]:.2f} |")
    within = 100.0 * np.mean(err < TOLERANCE_EV)
    print(f"\npoints whose true error is below the tolerance (the most any honest mark can "
          f"trust): {within:.1f} %")


if __name__ == "__main__":
    main()
