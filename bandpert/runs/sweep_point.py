"""One parameter point of a sweep: a material → one row of the table.

Module-level functions, so that Dask workers import :func:`evaluate_point` by name. Band edges
and masses come from the library's one band-edge routine
(:func:`bandpert.physics.masses.edge_masses`), exactly as ``bandpert masses`` computes them.
"""

from __future__ import annotations

import numpy as np

from ..crystal.lattice import point_group_rotations, reciprocal_vectors
from ..errors import InputError
from ..input.kp_file import parse_kp_material
from ..input.material import Material
from ..kp import masses_at_gamma, material_model
from ..physics.bands import BandStructure, compute_band_structure
from ..physics.deformation import deformation_potentials
from ..physics.extrema import locate_edges
from ..physics.masses import edge_masses
from ..planewave.basis import plane_wave_basis
from ..planewave.solver import single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2
from .sweep_spec import (
    SweepSpec,
    point_cutoff,
    point_document,
    point_material,
    point_strain,
)

#: Directions along which a k·p sweep reports the Γ masses.
KP_DIRECTIONS = ("001", "110", "111")

def evaluate_point(task: tuple[SweepSpec, tuple[float, ...]]) -> dict[str, float | str]:
    """One parameter point → one row of the sweep table (a flat dict of numbers and text).

    Module-level so that Dask workers import it by name; BLAS runs on one thread, so a point
    gives the same numbers serially and on any worker (energies and refined positions).
    Keys (all energies absolute, the model's own zero; masses in m0; see the README for the
    full list): ``cutoff_eV``,
    ``basis_size``, ``energy_zero_absolute_eV`` and ``energy_zero`` (the point's energy zero
    and its kind, :func:`bandpert.physics.bands.choose_energy_zero`); with "gaps"
    ``lower_<P>_eV``, ``upper_<P>_eV``, ``gap_<P>_eV`` for every label P; with "edges"
    ``valence_max_eV``, ``conduction_min_eV``, ``gap_eV``,
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
    # edges, masses and deformation potentials need a semiconductor: a metal's point fails, so
    # its Fermi level (a k-mesh: 15 s for germanium with one atom moved) would be wasted work
    needs_gap = bool({"edges", "masses", "deformation"} & set(spec.quantities))
    bs = compute_band_structure(material, n_k=spec.n_k, n_bands=spec.n_bands, cutoff_eV=cutoff,
                                check_cutoff=False, fermi_level=not needs_gap)
    row: dict[str, float | str] = {"cutoff_eV": cutoff, "basis_size": float(bs.model.size),
                                   # the point's energy zero, by the rule of every command
                                   "energy_zero_absolute_eV": bs.energy_zero_eV,
                                   "energy_zero": bs.energy_zero_kind}
    if "gaps" in spec.quantities:
        row.update(_gaps_at_points(bs, spec.points, spec.lower_band))
    if {"edges", "masses", "deformation"} & set(spec.quantities):
        row.update(_edges_and_masses(bs, spec))
    if material.potential.form == "continuous" and material.potential.taper_invA is not None:
        row["faithful_window"] = faithful_at(material)
    return row


def faithful_at(material: Material) -> str:
    """"yes" when no lattice shell lies inside the taper of a continuous v(q), else "no: …".

    Inside the taper the weights of the shells differ from the tabulated model's 1 and 0, so
    the strained or scaled model is no longer the fitted one continued with full weights; the
    point is then outside the faithful window.
    """
    q1, q2 = material.potential.taper_invA
    b = reciprocal_vectors(material.vectors_A)
    g = plane_wave_basis(b, HBAR2_OVER_2M0_EV_A2 * q2**2).g_cart_invA
    q = np.linalg.norm(g, axis=1)
    inside = q[(q > q1 * (1 + 1e-9)) & (q < q2 * (1 - 1e-9))]
    if inside.size == 0:
        return "yes"
    return (f"no: {inside.size} G with |G| = {inside.min():.4f}–{inside.max():.4f} Å⁻¹ inside "
            f"the taper {q1:.4f}–{q2:.4f} Å⁻¹")


def _kp_point(spec: SweepSpec, values: tuple[float, ...]) -> dict[str, float | str]:
    """A k·p file at one parameter point: masses of each model along [001], [110], [111]
    (columns ``<model>_<band>_<direction>_m0``, spaces as ``_``); with ``strain.*`` axes the
    six- and eight-band models only, strained (Bir–Pikus), and their Γ edges
    (``<model>_<band>_gamma_eV``, from the unstrained valence-band top)."""
    kpm = parse_kp_material(point_document(spec, values), spec.source)
    strained = any(a.kind == "strain" for a in spec.axes)
    eps = point_strain(spec, values) if strained else None
    row: dict[str, float | str] = {}
    for name in kpm.models:
        if strained and name == "two-band":
            continue
        model = material_model(kpm, name, strain=eps)
        if strained:
            for band in dict.fromkeys(model.band_names):
                level = np.mean([e for e, n in zip(model.gamma_energies_eV, model.band_names,
                                                   strict=True) if n == band])
                row[f"{name}_{band}_gamma_eV".replace(" ", "_").replace("-", "_")] = float(level)
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
    if "deformation" in spec.quantities:
        row.update(_deformation(bs, spec, edges))
    return row


def _deformation(bs: BandStructure, spec: SweepSpec, edges) -> dict[str, float]:
    """Deformation potentials at this point, to first order around it (eV)."""
    points = {p: np.asarray(bs.path.points_frac[p]) for p in spec.points
              if p in bs.path.points_frac}
    dp = deformation_potentials(bs.material, bs.model, edges, points,
                                point_group_rotations(bs.material))
    row = {f"dEg_dlnV_{g}_eV": float(v) for g, v in dp.gap_hydrostatic_eV.items()}
    row["xi_d_plus_xi_u_over_3_minus_a_v_eV"] = dp.xi_d_plus_xi_u_over_3_minus_a_v_eV
    for key, value in (("conduction_xi_u_eV", dp.xi_u_eV), ("valence_b_eV", dp.b_eV),
                       ("valence_d_eV", dp.d_eV)):
        if value is not None:
            row[key] = float(value)
    return row
