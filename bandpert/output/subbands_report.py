"""The JSON results and the CSV table of ``bandpert subbands`` (keys documented in the
README)."""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from .energy_zero import zero_entry

__all__ = ["ENERGY_ZERO", "subband_document", "subband_table"]

#: The energy zero of every subband output: the scale of the layers' valence-band offsets.
ENERGY_ZERO = "common band-offset scale"


def subband_document(result, settings: dict[str, Any], dispersion=None) -> dict[str, Any]:
    """The JSON document (the common envelope of every command; ``material`` is the structure),
    with ``results.in_plane`` when an :class:`~bandpert.heterostructure.InPlaneDispersion` is
    given.
    """
    bands = {}
    for band in result.levels_eV:
        entry: dict[str, Any] = {
            "labels": list(result.labels[band]),
            "energies_eV": result.levels_eV[band],
            "bound": result.bound[band],
            "density_per_nm": result.densities_per_nm[band],
            "edge_eV": result.edges_eV[band],
        }
        if result.miniband_edge_eV is not None:
            entry["miniband_edge_eV"] = result.miniband_edge_eV[band]
        bands[band] = entry
    doc = {
        "command": "subbands",
        "tool": {"name": "bandpert", "version": __version__},
        "material": {"name": result.name, "source": result.source, "file": result.file},
        "settings": settings,
        "results": {
            "model": result.model,
            "energy_zero": zero_entry(ENERGY_ZERO, 0.0),
            "periodic": result.periodic,
            "growth": result.growth,
            "spacing_nm": result.spacing_nm,
            "z_nm": result.z_nm,
            "interfaces_nm": result.interfaces_nm,
            "bands": bands,
            "transitions_eV": result.transitions_eV,
            "notes": list(result.notes),
        },
    }
    if dispersion is not None:
        doc["results"]["in_plane"] = {
            "k_invA": dispersion.k_invA,
            "directions": {d: {"conduction_eV": dispersion.conduction_eV[d],
                               "valence_eV": dispersion.valence_eV[d],
                               "in_plane_mass_m0": dispersion.in_plane_mass_m0[d]}
                           for d in dispersion.conduction_eV}}
    return doc


def subband_table(result) -> tuple[list[str], list[str], list[list[str]]]:
    """Header lines, columns and formatted rows: one row per level."""
    header = [f"bandpert {__version__} subbands ({result.model}): {result.name}",
              "energies in eV on the common valence-band-offset scale; bound = 1 below the "
              "barriers at both ends (electrons) or above them (holes)"]
    columns = ["band", "label", "energy_eV", "bound"]
    if result.miniband_edge_eV is not None:
        columns.append("miniband_edge_eV")
    rows = []
    for band, energies in result.levels_eV.items():
        for i, e in enumerate(energies):
            row = [band, result.labels[band][i], f"{e:.10g}", str(int(result.bound[band][i]))]
            if result.miniband_edge_eV is not None:
                row.append(f"{result.miniband_edge_eV[band][i]:.10g}")
            rows.append(row)
    if not all(np.isfinite(float(r[2])) for r in rows):
        raise ValueError("a non-finite number reached an output")
    return header, columns, rows
