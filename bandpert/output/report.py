"""Results → documents: the JSON envelope of every command, and the documents of ``bands``.

The JSON top level (CONVENTIONS.md, "Output files"): ``command``, ``tool`` (name, version),
``material`` (name, source, file), ``settings`` and ``results``. The README documents every key.
The other commands' documents are beside this module: :mod:`.gaps_report`,
:mod:`.masses_report`, :mod:`.kp_report` (``kp``, ``fullzone``, k·p bands along a path),
:mod:`.sweep_report` and :mod:`.dos_report`.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from ..input.material import Material
from ..physics.bands import BandStructure
from .energy_zero import energies_note, from_zero, with_absolute, zero_entry


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
    zero = bs.energy_zero_eV
    edges = None
    if bs.edges is not None:
        g = bs.edges
        edges = {
            "gap_eV": g.gap_eV,
            "direct_gap_eV": g.direct_gap_eV,
            "direct_gap_k_index": g.direct_gap_index,
            "valence_max_k_index": g.valence_max_index,
            "valence_max_k_frac": p.k_frac[g.valence_max_index],
            "conduction_min_k_index": g.conduction_min_index,
            "conduction_min_k_frac": p.k_frac[g.conduction_min_index],
        }
        with_absolute(edges, "valence_max", g.valence_max_eV, zero)
        with_absolute(edges, "conduction_min", g.conduction_min_eV, zero)
    results = {
        "perturbative": None if bs.perturbative is None else perturbative_results(bs),
        "k_frac": p.k_frac,
        "k_cart_invA": p.k_cart_invA,
        "path_distance_invA": p.distance_invA,
        "labels": [{"label": lab, "k_index": int(i), "path_distance_invA": p.distance_invA[i]}
                   for i, lab in zip(p.label_indices, p.labels, strict=True)],
        "leg_starts": p.leg_starts,
        "energy_zero": zero_entry(bs.energy_zero_kind, zero),
        "band_edges": edges,
        "basis_size": bs.model.size,
        "symmetry": {"space_group_number": bs.symmetry.number,
                     "space_group_symbol": bs.symmetry.international},
    }
    with_absolute(results, "energies", bs.energies_eV, zero)
    return results


def finite_or_none(a: np.ndarray) -> list:
    """Nested lists with ±inf (a terminating series, a flat direction) written as null."""
    return [[None if not np.isfinite(x) else float(x) for x in row] for row in np.atleast_2d(a)]


def _inside_or_none(radius: np.ndarray, lam: float) -> list:
    """Nested lists of ``λ < radius``; null where the radius is undetermined (NaN)."""
    return [[None if np.isnan(x) else bool(x > lam) for x in row] for row in np.atleast_2d(radius)]


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
        "energies_eV": from_zero(pb.energies_eV, bs.energy_zero_eV),
        "energies_absolute_eV": pb.energies_eV,
        "treatment": pb.treatment,
        "treatment_names": list(pb.treatment_names),
        "error_estimate_eV": pb.error_estimate_eV,
        "error_bound_eV": finite_or_none(pb.error_bound_eV),
        "max_coupling_ratio": pb.max_coupling_ratio,
        "group_size": pb.group_size,
        "trustworthy": pb.trustworthy,
        "trustworthy_fraction": float(pb.trustworthy.mean()),
        "threshold_used": pb.threshold_used,
        "convergence_radius": {
            "k_indices": pb.radius_k_indices,
            "radius": finite_or_none(pb.convergence_radius) if len(pb.radius_k_indices) else [],
            "lambda_inside": _inside_or_none(pb.convergence_radius, s.lam),
        },
        "comparison": None if cmp is None else {
            "matched": "band by band in sorted order at each k",
            "abs_error_eV": cmp.abs_error_eV,
            "max_error_eV": float(cmp.abs_error_eV.max()),
            "max_error_trustworthy_eV": cmp.max_error_trustworthy_eV,
            "over_tolerance_trustworthy": cmp.over_tolerance_trustworthy,
            "estimate_coverage": cmp.estimate_coverage,
            "bound_coverage": cmp.bound_coverage,
        },
    }


def perturbative_table(bs: BandStructure) -> tuple[list[str], list[str], np.ndarray]:
    """Header lines, column names and rows of the perturbative-bands CSV."""
    pb = bs.perturbative
    header = [
        f"bandpert {__version__} perturbative bands (order {pb.settings.order}): "
        f"{bs.material.name}",
        energies_note(bs.energy_zero_kind, bs.energy_zero_eV) + "; error estimates in meV; "
        "treatment 0 = non-degenerate (Rayleigh-Schrodinger), 1 = subspace (Lowdin); "
        "bound = proven bound on |E_pert - E_exact| in meV (-1: cannot vouch); "
        "trustworthy 1 = bound below the tolerance",
    ]
    n_b = pb.energies_eV.shape[1]
    cols = ["k_index", "path_distance_invA"]
    blocks = [np.arange(len(bs.path.k_frac)), bs.path.distance_invA]
    for b in range(n_b):
        cols += [f"band{b + 1}_eV", f"band{b + 1}_estimate_meV", f"band{b + 1}_bound_meV",
                 f"band{b + 1}_treatment", f"band{b + 1}_trustworthy"]
        blocks += [pb.energies_eV[:, b] - bs.energy_zero_eV, pb.error_estimate_eV[:, b] * 1e3,
                   np.where(np.isfinite(pb.error_bound_eV[:, b]), pb.error_bound_eV[:, b] * 1e3,
                            -1.0), pb.treatment[:, b], pb.trustworthy[:, b]]
    return header, cols, np.column_stack(blocks)


def band_structure_table(bs: BandStructure) -> tuple[list[str], list[str], np.ndarray]:
    """Header lines, column names and rows of the bands CSV (energies from the energy zero)."""
    p = bs.path
    d = p.k_frac.shape[1]
    axes = "xyz"[:d]
    kind = "exact" if bs.energies_eV is not None else "perturbative (exact bands skipped)"
    header = [
        f"bandpert {__version__} bands ({kind}): {bs.material.name}",
        energies_note(bs.energy_zero_kind, bs.energy_zero_eV) + "; "
        "wave vectors in 1/Angstrom (Cartesian, 2*pi included) and as reciprocal fractions",
    ]
    cols = (["k_index", "path_distance_invA"] + [f"k{a}_invA" for a in axes]
            + [f"k{i + 1}_frac" for i in range(d)]
            + [f"band{n + 1}_eV" for n in range(bs.n_bands)])
    rows = np.column_stack([np.arange(len(p.k_frac)), p.distance_invA, p.k_cart_invA, p.k_frac,
                            bs.relative_energies_eV])
    return header, cols, rows


def with_k_labels(bs: BandStructure, columns: list[str],
                  rows: np.ndarray) -> tuple[list[str], list[list[str]]]:
    """A path table with a ``k_label`` column after the first two: the point's label (Γ, X, …)
    where the path has one, else empty; numbers formatted as :func:`bandpert.io.write_csv`."""
    labels = [""] * len(bs.path.k_frac)
    for i, lab in zip(bs.path.label_indices, bs.path.labels, strict=True):
        labels[int(i)] = lab
    cells = [[f"{x:.10g}" for x in row] for row in np.asarray(rows, dtype=float)]
    return (columns[:2] + ["k_label"] + columns[2:],
            [row[:2] + [lab] + row[2:] for row, lab in zip(cells, labels, strict=True)])
