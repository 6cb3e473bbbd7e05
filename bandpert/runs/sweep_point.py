"""One parameter point of a sweep: a material → one row of the table.

Module-level functions, so that Dask workers import :func:`evaluate_point` by name. Band edges
and masses come from the library's one band-edge routine
(:func:`bandpert.physics.masses.edge_masses`), exactly as ``bandpert masses`` computes them.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..input.kp_file import parse_kp_material
from ..kp import masses_at_gamma
from ..physics.bands import BandStructure, compute_band_structure
from ..physics.extrema import locate_edges
from ..physics.masses import edge_masses
from ..planewave.model import single_blas_thread
from .sweep_spec import SweepSpec, point_cutoff, point_document, point_material

#: Directions along which a k·p sweep reports the Γ masses.
KP_DIRECTIONS = ("001", "110", "111")

def evaluate_point(task: tuple[SweepSpec, tuple[float, ...]]) -> dict[str, float | str]:
    """One parameter point → one row of the sweep table (a flat dict of numbers and text).

    Module-level so that Dask workers import it by name; BLAS runs on one thread, so a point
    gives the same numbers serially and on any worker (energies and refined positions).
    Keys (all energies absolute, the model's own zero; masses in m0; see the README for the
    full list): ``cutoff_eV``,
    ``basis_size``; with "gaps" ``lower_<P>_eV``, ``upper_<P>_eV``, ``gap_<P>_eV`` for every
    label P; with "edges" ``valence_max_eV``, ``conduction_min_eV``, ``gap_eV``,
    ``direct_gap_eV``, ``valence_max_k{1,2,3}_frac``, ``conduction_min_k{1,2,3}_frac``,
    ``valence_max_at``, ``conduction_min_at``; with "masses" ``conduction_m{1,2,3}``,
    ``conduction_valleys``, ``conduction_dos_mass``, ``conduction_conductivity_mass``,
    ``valence_m{1,2,3}`` or ``valence_gamma{1,2,3}`` (degenerate top), ``valence_dos_mass``.
    """
    spec, values = task
    with single_blas_thread():  # the same arithmetic in this process and in any worker
        if spec.kind == "k·p":
            return _kp_point(spec, values)
        return _plane_wave_point(spec, values)


def _plane_wave_point(spec: SweepSpec, values: tuple[float, ...]) -> dict[str, float | str]:
    material = point_material(spec, values)
    cutoff = point_cutoff(spec, material)
    bs = compute_band_structure(material, n_k=spec.n_k, n_bands=spec.n_bands, cutoff_eV=cutoff,
                                check_cutoff=False)
    row: dict[str, float | str] = {"cutoff_eV": cutoff, "basis_size": float(bs.model.size)}
    if "gaps" in spec.quantities:
        row.update(_gaps_at_points(bs, spec.points, spec.lower_band))
    if "edges" in spec.quantities or "masses" in spec.quantities:
        row.update(_edges_and_masses(bs, spec))
    return row


def _kp_point(spec: SweepSpec, values: tuple[float, ...]) -> dict[str, float | str]:
    """A k·p file at one parameter point: Γ energies and masses of each model along
    [001], [110], [111] (columns ``<model>_<band>_<direction>_m0``, spaces as ``_``)."""
    kpm = parse_kp_material(point_document(spec, values), spec.source)
    row: dict[str, float | str] = {}
    for name in kpm.models:
        model = kpm.model(name)
        for direction in KP_DIRECTIONS:
            for band, mass in masses_at_gamma(model, direction).as_dict().items():
                row[f"{name}_{band}_{direction}_m0".replace(" ", "_").replace("-", "_")] = mass
    return row


def _gaps_at_points(bs: BandStructure, labels: tuple[str, ...], lower_band: int) -> dict:
    row: dict[str, float] = {}
    e = bs.energies_eV
    if lower_band >= e.shape[1]:
        raise InputError(f"band {lower_band} has no band above it among the {e.shape[1]} "
                         "computed; expected fewer or more bands", key="lower_band")
    where = {}
    for index, label in zip(bs.path.label_indices, bs.path.labels, strict=True):
        for name in label.split("|"):
            where.setdefault(name, int(index))
    for label in labels:
        i = where[label]
        lo, hi = float(e[i, lower_band - 1]), float(e[i, lower_band])
        row[f"lower_{label}_eV"] = lo
        row[f"upper_{label}_eV"] = hi
        row[f"gap_{label}_eV"] = hi - lo
    return row


def _edges_and_masses(bs: BandStructure, spec: SweepSpec) -> dict:
    """Band edges (and their masses) at one point, by the library's one band-edge routine
    (:func:`bandpert.physics.masses.edge_masses`)."""
    if bs.edges is None:
        raise InputError("no gap between the occupied and the empty bands at this point (a "
                         "metal, or no electrons.valence); edges and masses need a semiconductor",
                         spec.source, "electrons.valence")
    if "masses" in spec.quantities:
        edges, masses = edge_masses(bs, spec.temperature_K, cross_check=False,
                                    reference_rotations=spec.reference_rotations)
    else:
        edges, masses = locate_edges(bs, spec.reference_rotations), []
    row: dict[str, float | str] = {}
    names = {"conduction minimum": ("conduction_min", "conduction"),
             "valence maximum": ("valence_max", "valence")}
    for e in edges[::-1]:  # valence first: the column order of the table
        name = names[e.name][0]
        row[f"{name}_eV"] = e.energy_eV
        for i, x in enumerate(e.k_frac):
            row[f"{name}_k{i + 1}_frac"] = float(x)
        row[f"{name}_at"] = e.where
    row["gap_eV"] = float(row["conduction_min_eV"]) - float(row["valence_max_eV"])
    row["direct_gap_eV"] = bs.edges.direct_gap_eV
    for m in masses:
        prefix = names[m.label][1]
        row[f"{prefix}_point"] = m.critical_point.kind
        if m.tensor is not None:
            for i, x in enumerate(np.sort(m.tensor.principal_masses)):
                row[f"{prefix}_m{i + 1}"] = float(x)
            if m.conductivity_mass is not None:
                row[f"{prefix}_conductivity_mass"] = float(m.conductivity_mass)
        elif m.edge is not None and m.edge.luttinger is not None:
            for i, g in enumerate(m.edge.luttinger):
                row[f"{prefix}_gamma{i + 1}"] = float(g)
        if m.valleys is not None:
            row[f"{prefix}_valleys"] = float(m.valleys)
        if m.dos_mass is not None:
            row[f"{prefix}_dos_mass"] = float(m.dos_mass)
    return row
