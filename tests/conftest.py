"""Shared helpers for the tests: materials built in code from plain dictionaries."""

from __future__ import annotations

import numpy as np
import pytest

from bandpert.data import MATERIALS_DIR
from bandpert.input.material import Material, load_material, parse_material

MATERIALS = MATERIALS_DIR / "planewave"


def make_material(lattice: dict, atoms: list[dict], potential: dict, **extra) -> Material:
    """A material from Python values, validated exactly like a file."""
    doc = {"name": "test", "source": "test", "lattice": lattice, "atoms": atoms,
           "potential": potential, **extra}
    return parse_material(doc, "<test>")


def bundled(name: str) -> Material:
    """A bundled material by file stem."""
    return load_material(MATERIALS / f"{name}.toml")


@pytest.fixture(scope="session")
def silicon() -> Material:
    return bundled("silicon")


@pytest.fixture(scope="session")
def dask_scheduler():
    """A Dask cluster of two worker processes on 127.0.0.1; yields its scheduler address.

    The tests hand the address to the tool as an existing scheduler would be handed
    (``Engine(kind="scheduler")``), so the connect path is exercised too.
    """
    from bandpert.runs.execution import local_cluster

    cluster = local_cluster(2)
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()


def eight_band_deviation(material: Material, cutoff_eV: float, kp) -> dict[str, float]:
    """Worst relative deviation of the eight-band valence bands of a k·p file from the spinor
    plane-wave bands of ``material`` at k = 0.02·2π/a along [100], [110], [111].

    Kramers-pair averages of the three valence pairs below the top (the zincblende k-linear
    splitting makes single branches non-analytic at Γ), energies from the valence top: the
    check issue 17 asks of a written k·p file (within 1 %).
    """
    from bandpert.kp.hamiltonians import eight_band_model
    from bandpert.kp.parameters import unit_vector
    from bandpert.planewave.model import centred_model
    from bandpert.planewave.solver import exact_energies, single_blas_thread

    model = eight_band_model(kp.parameters, kp.a_A)
    out = {}
    with single_blas_thread():
        pw = centred_model(material, cutoff_eV, np.zeros(3), spin_orbit=True)
        top = exact_energies(pw, np.zeros((1, 3)), 8)[0, 7]
        for direction in ("100", "110", "111"):
            k = 0.02 * (2 * np.pi / material.a_A) * unit_vector(direction)
            e_pw = exact_energies(pw, k[None], 8)[0, 2:8] - top
            e_kp = np.sort(np.ravel(model.energies_eV(k[None])))[:6]
            pairs_pw = (e_pw[0::2] + e_pw[1::2]) / 2
            pairs_kp = (e_kp[0::2] + e_kp[1::2]) / 2
            out[direction] = float(np.max(np.abs(pairs_kp / pairs_pw - 1)))
    return out
