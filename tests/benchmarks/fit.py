"""Benchmark: a fit of silicon with spin–orbit, 6 parameters and 10 targets (issue target: under a
minute on 2 cores).

The fit is the one that made the bundled ``silicon-fitted.toml`` at the issue's size: the 1966
form factors plus spin–orbit and nonlocal wells (depths zero) as the start, the ten targets of
``bandpert/data/fit_targets/silicon-spin-orbit.toml`` and its first six parameters (the bundled
file also fits the d-well radius, a seventh). Printed side by side: the whole fit, and one
evaluation of the ten targets, with the fit's count of evaluations and Jacobians, its CPU time
and the machine's load, so the wall time can be read on a shared machine.

Run: ``python tests/benchmarks/fit.py`` from the repository root.
"""

from __future__ import annotations

import os
import time
from importlib import resources

from bandpert.input.material import parse_material
from bandpert.input.reader import read_toml_document
from bandpert.physics.fit_targets import parse_targets
from bandpert.planewave.solver import single_blas_thread
from bandpert.runs.fit import Fit, run_fit

try:
    from timing import median_time
except ImportError:  # run as a module from the repository root
    from tests.benchmarks.timing import median_time

#: The starting point: the bundled file's 1966 form factors, spin–orbit strength before the fit,
#: and nonlocal wells of zero depth at a fixed radius (the README's "Bundled spin–orbit files").
START = {"potential.symmetric": [-0.21, 0.04, 0.08],
         "spin_orbit.species.Si.strength_eV": 0.00238512,
         "nonlocal": {"species": {"Si": {"A0_eV": 0.0, "R0_A": 1.06, "A2_eV": 0.0,
                                         "R2_A": 1.06}}}}


def start_document() -> dict:
    data = resources.files("bandpert.data")
    doc = read_toml_document(data / "materials" / "planewave" / "silicon-spin-orbit.toml")
    doc["potential"]["symmetric"] = list(START["potential.symmetric"])
    doc["spin_orbit"]["species"]["Si"]["strength_eV"] = START["spin_orbit.species.Si.strength_eV"]
    doc["nonlocal"] = START["nonlocal"]
    return doc


def main() -> None:
    data = resources.files("bandpert.data")
    doc = start_document()
    material = parse_material(doc, "start")
    targets = read_toml_document(data / "fit_targets" / "silicon-spin-orbit.toml")
    targets["parameters"] = targets["parameters"][:6]
    spec = parse_targets(targets, "targets", material)
    load = os.getloadavg()[0]
    cpu0, t0 = time.process_time(), time.perf_counter()
    jacobians = []
    fit = Fit(doc, "start", spec)
    original = fit.jacobian

    def counted(p, finite_differences=False):
        jacobians.append(1)
        return original(p, finite_differences)

    fit.jacobian = counted
    result = run_fit(doc, "start", spec, fit=fit)
    wall, cpu = time.perf_counter() - t0, time.process_time() - cpu0
    with single_blas_thread():
        one = median_time(lambda: fit.targets.values(fit.material(result.values)), 3)
    print(f"silicon with spin-orbit: {len(spec.parameters)} parameters, {len(spec.targets)} "
          f"targets, load average {load:.1f} at the start")
    print(f"  whole fit            {wall:8.1f} s wall  {cpu:8.1f} s CPU  "
          f"({result.evaluations} evaluations, {len(jacobians)} Jacobians; target < 60 s)")
    print(f"  ten targets once     {one:8.2f} s wall  (fit / one evaluation = {wall / one:.0f}×)")
    outside = sum(abs(r) > 1 for r in result.residuals)
    print(f"  targets outside their tolerance: {outside} of {len(spec.targets)}; Jacobian rank "
          f"{result.rank} of {len(spec.parameters)}")


if __name__ == "__main__":
    main()
