"""The documents of the k·p commands: ``kp``, ``fullzone`` and ``bands`` on a k·p file."""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from .energy_zero import with_absolute, zero_entry


def kp_results(analysis, exact=None) -> dict[str, Any]:
    """The ``results`` of ``bandpert kp`` (keys documented in the README).

    ``analysis`` is a :class:`bandpert.kp.KPAnalysis`; ``exact`` an optional
    :class:`bandpert.physics.kp_from_planewave.ExactLines` with its file name.
    """
    models = {}
    for name, m in analysis.models.items():
        entry: dict[str, Any] = {"masses_m0": m.masses_m0,
                                 "energies_at_gamma_eV": m.gamma_energies_eV}
        if m.nonparabolicity is not None:
            entry["nonparabolicity"] = {"direction": "[001]",
                                        "model_alpha_per_eV": m.nonparabolicity.alpha_per_eV,
                                        "kane_alpha_per_eV": m.kane_alpha_per_eV,
                                        "kane_alpha_source": m.kane_alpha_source,
                                        "edge_mass_m0": m.nonparabolicity.edge_mass_m0}
        if m.strain_edges is not None:
            entry["strain_edges"] = m.strain_edges
        models[name] = entry
    results: dict[str, Any] = {"models": models,
                               "reference_masses_m0": analysis.reference_masses_m0,
                               "parameters": analysis.parameters.as_dict(),
                               "energy_zero": zero_entry(analysis.energy_zero, 0.0)}
    if analysis.strain is not None:
        results["strain"] = analysis.strain.as_dict()
    if exact is not None:
        lines, file = exact
        results["compared_with"] = {"file": file, "name": lines.name}
    return results


def fullzone_results(result) -> dict[str, Any]:
    """The ``results`` of ``bandpert fullzone`` (a
    :class:`bandpert.physics.fullzone.FullZoneResult`; keys documented in the README)."""
    bs, conv = result.exact, result.convergence
    out = {"basis_sizes": conv.basis_sizes, "requested_basis_sizes": conv.requested_sizes,
           "shown_basis_size": int(conv.basis_sizes[conv.shown_index]),
           "max_error_eV": conv.max_error_eV,
           "rms_error_eV": conv.rms_error_eV, "k_frac": bs.path.k_frac,
           "energy_zero": zero_entry(bs.energy_zero_kind, bs.energy_zero_eV)}
    with_absolute(out, "exact_energies", bs.energies_eV, bs.energy_zero_eV)
    with_absolute(out, "kp_energies", conv.energies_eV, bs.energy_zero_eV)
    return out


def kp_path_results(bands) -> dict[str, Any]:
    """The ``results`` of ``bandpert bands`` on a k·p file (a :class:`bandpert.kp.PathBands`;
    keys documented in the README)."""
    return {"kind": "kp", "energy_zero": zero_entry(bands.energy_zero, 0.0),
            "path": {"labels": list(bands.labels), "label_indices": bands.label_indices,
                     "fraction": bands.fraction, "k_max_invA": bands.k_max_invA},
            "k_cart_invA": bands.k_cart_invA, "k_2pi_a": bands.k_2pi_a,
            "distance_2pi_a": bands.distance_2pi_a,
            "models": {m: {"band_names": list(bands.band_names[m]),
                           "energies_eV": bands.energies_eV[m]} for m in bands.models}}


def kp_path_table(bands, material_name: str) -> tuple[list[str], list[str], np.ndarray]:
    """Header lines, column names and rows of the CSV of k·p bands along the path."""
    header = [f"bandpert {__version__} bands (k·p models along the path): {material_name}",
              f"energies in eV from the {bands.energy_zero} (the models' own zero); "
              "wave vectors in 1/Angstrom (Cartesian, 2*pi included) and in units of 2*pi/a; path "
              + " – ".join(bands.labels)]
    cols = (["k_index", "path_distance_2pi_a", "kx_invA", "ky_invA", "kz_invA", "kx_2pi_a",
             "ky_2pi_a", "kz_2pi_a"]
            + [f"{m}_band{n + 1}_eV" for m in bands.models
               for n in range(bands.energies_eV[m].shape[1])])
    rows = np.column_stack([np.arange(len(bands.distance_2pi_a)), bands.distance_2pi_a,
                            bands.k_cart_invA, bands.k_2pi_a,
                            *[bands.energies_eV[m] for m in bands.models]])
    return header, cols, rows
