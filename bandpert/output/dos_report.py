"""The documents of ``bandpert dos``: JSON results and the CSV table."""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from .energy_zero import energies_note, with_absolute, zero_entry


def dos_results(result) -> dict[str, Any]:
    """The ``results`` of ``bandpert dos`` (keys documented in the README)."""
    d = result.dos
    zero = result.energy_zero_eV
    out: dict[str, Any] = {"energy_zero": zero_entry(result.energy_zero_kind, zero)}
    for key, value in (("fermi_level", result.fermi_level_eV),
                       ("valence_max", result.valence_max_eV),
                       ("conduction_min", result.conduction_min_eV),
                       ("complete_below", result.complete_below_eV)):
        with_absolute(out, key, value, zero)
    out |= {
        "gap_eV": result.gap_eV,
        "mesh": {"shape": list(result.mesh.shape), "full_points": result.mesh.n_full,
                 "irreducible_points": len(result.mesh.k_frac)},
        "method": d.method,
        "smearing_eV": d.smearing_eV,
    }
    with_absolute(out, "energies", d.energies_eV, zero)
    return out | {"dos_per_eV": d.dos_per_eV, "integrated_electrons": d.integrated}


def dos_table(result) -> tuple[list[str], list[str], np.ndarray]:
    """Header lines, column names and rows of the DOS CSV (energies from the energy zero,
    absolute beside them)."""
    d = result.dos
    how = d.method + ("" if d.smearing_eV is None else f", sigma = {d.smearing_eV:g} eV")
    header = [f"bandpert {__version__} density of states ({how}): {result.material.name}",
              f"mesh {'x'.join(str(n) for n in result.mesh.shape)} "
              f"({len(result.mesh.k_frac)} irreducible points); "
              + energies_note(result.energy_zero_kind, result.energy_zero_eV)
              + " (energy_eV; absolute in energy_absolute_eV)",
              "dos in states per eV per primitive cell, both spins; integrated in electrons per "
              "cell"]
    cols = ["energy_eV", "energy_absolute_eV", "dos_per_eV", "integrated_electrons"]
    rows = np.column_stack([d.energies_eV - result.energy_zero_eV, d.energies_eV, d.dos_per_eV,
                            d.integrated])
    return header, cols, rows
