"""Shared helpers for the tests: materials built in code from plain dictionaries."""

from __future__ import annotations

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
