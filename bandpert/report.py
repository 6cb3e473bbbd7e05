"""Results → documents: the JSON layout and CSV tables shared by every command.

The JSON top level (CONVENTIONS.md, "Output files"): ``command``, ``tool`` (name, version),
``material`` (name, source, file), ``settings`` and ``results``. The README documents every key.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from . import __version__
from .bands import BandStructure
from .material import Material


def document(command: str, material: Material, settings: dict[str, Any],
             results: dict[str, Any]) -> dict[str, Any]:
    """The common JSON envelope of every command."""
    return {
        "command": command,
        "tool": {"name": "bandpert", "version": __version__},
        "material": {"name": material.name, "source": material.source, "file": material.file},
        "settings": settings,
        "results": results,
    }


def band_structure_results(bs: BandStructure) -> dict[str, Any]:
    """The ``results`` of ``bandpert bands`` (keys documented in the README)."""
    p = bs.path
    edges = None
    if bs.edges is not None:
        g = bs.edges
        edges = {
            "gap_eV": g.gap_eV,
            "direct_gap_eV": g.direct_gap_eV,
            "direct_gap_k_index": g.direct_gap_index,
            "valence_max_eV": g.valence_max_eV,
            "valence_max_k_index": g.valence_max_index,
            "valence_max_k_frac": p.k_frac[g.valence_max_index],
            "conduction_min_eV": g.conduction_min_eV,
            "conduction_min_k_index": g.conduction_min_index,
            "conduction_min_k_frac": p.k_frac[g.conduction_min_index],
        }
    return {
        "perturbative": None if bs.perturbative is None else perturbative_results(bs),
        "k_frac": p.k_frac,
        "k_cart_invA": p.k_cart_invA,
        "path_distance_invA": p.distance_invA,
        "labels": [{"label": lab, "k_index": int(i), "path_distance_invA": p.distance_invA[i]}
                   for i, lab in zip(p.label_indices, p.labels, strict=True)],
        "leg_starts": p.leg_starts,
        "energies_eV": bs.energies_eV,
        "energy_zero_eV": bs.energy_zero_eV,
        "energy_zero_kind": bs.energy_zero_kind,
        "band_edges": edges,
        "basis_size": bs.model.size,
        "symmetry": {"space_group_number": bs.symmetry.number,
                     "space_group_symbol": bs.symmetry.international},
    }


def _finite_or_none(a: np.ndarray) -> list:
    """Nested lists with +inf (a terminating series) written as null."""
    return [[None if not np.isfinite(x) else float(x) for x in row] for row in np.atleast_2d(a)]


def perturbative_results(bs: BandStructure) -> dict[str, Any]:
    """The ``results.perturbative`` section of ``bandpert bands`` (keys in the README)."""
    pb = bs.perturbative
    s = pb.settings
    cmp = bs.comparison
    return {
        "order": s.order,
        "coupling_threshold": s.coupling_threshold,
        "tolerance_eV": s.tolerance_eV,
        "lambda": s.lam,
        "energies_eV": pb.energies_eV,
        "treatment": pb.treatment,
        "treatment_names": list(pb.treatment_names),
        "error_estimate_eV": pb.error_estimate_eV,
        "max_coupling_ratio": pb.max_coupling_ratio,
        "group_size": pb.group_size,
        "trustworthy": pb.trustworthy,
        "trustworthy_fraction": float(pb.trustworthy.mean()),
        "threshold_used": pb.threshold_used,
        "convergence_radius": {
            "k_indices": pb.radius_k_indices,
            "radius": _finite_or_none(pb.convergence_radius) if len(pb.radius_k_indices) else [],
            "lambda_inside": pb.convergence_radius > s.lam,
        },
        "comparison": None if cmp is None else {
            "matched": "band by band in sorted order at each k",
            "abs_error_eV": cmp.abs_error_eV,
            "max_error_eV": float(cmp.abs_error_eV.max()),
            "max_error_trustworthy_eV": cmp.max_error_trustworthy_eV,
            "estimate_coverage": cmp.estimate_coverage,
        },
    }


def perturbative_table(bs: BandStructure) -> tuple[list[str], list[str], np.ndarray]:
    """Header lines, column names and rows of the perturbative-bands CSV."""
    pb = bs.perturbative
    header = [
        f"bandpert {__version__} perturbative bands (order {pb.settings.order}): "
        f"{bs.material.name}",
        f"energies in eV relative to the {bs.energy_zero_kind} "
        f"(add {bs.energy_zero_eV:.6f} eV for absolute energies); error estimates in meV; "
        "treatment 0 = non-degenerate (Rayleigh-Schrodinger), 1 = subspace (Lowdin); "
        "trustworthy 1 = error estimate below the tolerance",
    ]
    n_b = pb.energies_eV.shape[1]
    cols = ["k_index", "path_distance_invA"]
    blocks = [np.arange(len(bs.path.k_frac)), bs.path.distance_invA]
    for b in range(n_b):
        cols += [f"band{b + 1}_eV", f"band{b + 1}_estimate_meV", f"band{b + 1}_treatment",
                 f"band{b + 1}_trustworthy"]
        blocks += [pb.energies_eV[:, b] - bs.energy_zero_eV, pb.error_estimate_eV[:, b] * 1e3,
                   pb.treatment[:, b], pb.trustworthy[:, b]]
    return header, cols, np.column_stack(blocks)


def band_structure_table(bs: BandStructure) -> tuple[list[str], list[str], np.ndarray]:
    """Header lines, column names and rows of the bands CSV (energies from the energy zero)."""
    p = bs.path
    d = p.k_frac.shape[1]
    axes = "xyz"[:d]
    kind = "exact" if bs.energies_eV is not None else "perturbative (exact bands skipped)"
    header = [
        f"bandpert {__version__} bands ({kind}): {bs.material.name}",
        f"energies in eV relative to the {bs.energy_zero_kind} "
        f"(add {bs.energy_zero_eV:.6f} eV for the model's absolute energies); "
        "wave vectors in 1/Angstrom (Cartesian, 2*pi included) and as reciprocal fractions",
    ]
    cols = (["k_index", "path_distance_invA"] + [f"k{a}_invA" for a in axes]
            + [f"k{i + 1}_frac" for i in range(d)]
            + [f"band{n + 1}_eV" for n in range(bs.energies_eV.shape[1])])
    rows = np.column_stack([np.arange(len(p.k_frac)), p.distance_invA, p.k_cart_invA, p.k_frac,
                            bs.relative_energies_eV])
    return header, cols, rows
