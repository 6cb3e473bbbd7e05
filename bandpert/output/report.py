"""Results → documents: the JSON layout and CSV tables shared by every command.

The JSON top level (CONVENTIONS.md, "Output files"): ``command``, ``tool`` (name, version),
``material`` (name, source, file), ``settings`` and ``results``. The README documents every key.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from ..input.material import Material
from ..kp.parameters import dkk_with_free_electron
from ..physics.bands import BandStructure
from ..physics.nfe_gaps import POOR_MATCH_WEIGHT, REASON_COUPLED, REASON_TAGS, VERDICT_RULE
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


def _finite_or_none(a: np.ndarray) -> list:
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
        "error_bound_eV": _finite_or_none(pb.error_bound_eV),
        "max_coupling_ratio": pb.max_coupling_ratio,
        "group_size": pb.group_size,
        "trustworthy": pb.trustworthy,
        "trustworthy_fraction": float(pb.trustworthy.mean()),
        "threshold_used": pb.threshold_used,
        "convergence_radius": {
            "k_indices": pb.radius_k_indices,
            "radius": _finite_or_none(pb.convergence_radius) if len(pb.radius_k_indices) else [],
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


def _vector_label(g_cart_invA: np.ndarray, miller: np.ndarray, a_A: float) -> str:
    """G as ``(h,k,l)`` in units of 2π/a when integral (cubic, square, chain), else by Miller."""
    u = np.asarray(g_cart_invA, dtype=float) / (2.0 * np.pi / a_A)
    if np.allclose(u, np.round(u), atol=1e-9):
        return "(" + ",".join(str(int(x)) for x in np.round(u)) + ")"
    return "m(" + ",".join(str(int(x)) for x in miller) + ")"


def _group_results(group, a_A: float, zero_eV: float) -> dict[str, Any]:
    entry: dict[str, Any] = {
        "first_index": group.first_index,
        "degeneracy": group.degeneracy,
        "miller": group.miller,
        "g_cart_invA": group.g_cart_invA,
    }
    with_absolute(entry, "free_electron_energy", group.free_electron_eV, zero_eV)
    with_absolute(entry, "first_order", group.first_order_eV, zero_eV)
    with_absolute(entry, "second_order", group.second_order_eV, zero_eV)
    with_absolute(entry, "exact", group.exact_eV, zero_eV)
    return entry | {
        "exact_weight": group.exact_weight,
        "poor_match": group.poor_match,
        "first_order_gaps_eV": group.first_order_gaps_eV,
        "second_order_gaps_eV": group.second_order_gaps_eV,
        "exact_gaps_eV": group.exact_gaps_eV,
        "first_order_error_eV": group.first_order_error_eV,
        "second_order_error_eV": group.second_order_error_eV,
        "gap_opens_at": list(group.gap_opens_at),
        "verdicts": [{"order": v.order, "holds": v.holds, "gap_error_eV": v.error_eV,
                      "relative_error": v.relative_error} for v in group.verdicts],
        "status": group.status,
        "exact_multiplets": list(group.exact_multiplets),
        "uncoupled": group.uncoupled,
        "uncoupled_reason": group.uncoupled_reason,
        "couplings": [
            {"delta_miller": m, "delta_g_cart_invA": g,
             "delta_g_label": _vector_label(g, m, a_A), "shell_g2": s,
             "value_eV": [float(v.real), float(v.imag)], "abs_eV": float(abs(v)), "reason": r}
            for m, g, s, v, r in zip(group.coupling_miller, group.coupling_g_cart_invA,
                                     group.coupling_shell_g2, group.coupling_eV,
                                     group.coupling_reason, strict=True)
        ],
    }


def gap_results(report, bs: BandStructure | None = None) -> dict[str, Any]:
    """The ``results`` of ``bandpert gaps`` (keys documented in the README).

    ``report`` is a :class:`bandpert.physics.nfe_gaps.GapReport`; ``bs`` the band structure
    drawn beside it, whose energy zero every energy is given from (the model's zero without
    it); the absolute energies are kept as ``…_absolute_eV``.
    """

    a = report.material.a_A
    kind, zero = ("absolute", 0.0) if bs is None else (bs.energy_zero_kind, bs.energy_zero_eV)
    points = []
    for p in report.points:
        levels: dict[str, Any] = {}
        with_absolute(levels, "energies", p.level_energies_eV, zero)
        points.append({
            "label": p.label,
            "kind": p.kind,
            "k_frac": p.k_frac,
            "k_cart_invA": p.k_cart_invA,
            "path_distance_invA": p.path_distance_invA,
            "segment": None if p.segment is None else {
                "from": p.segment[0], "to": p.segment[1], "fraction": p.segment_fraction},
            "free_electron_levels": levels | {"degeneracies": p.level_degeneracies,
                                              "first_indices": p.level_first_indices},
            "groups": [_group_results(g, a, zero) for g in p.groups],
        })
    return {
        "matched": "exact levels by sorted position: a group at free-electron positions "
                   "i..i+g-1 takes the exact eigenvalues i..i+g-1 of H(k)",
        "basis": "centred on each k: hbar^2|k+G|^2/2m0 <= cutoff",
        "n_bands": report.n_bands,
        "degeneracy_tolerance_eV": report.degeneracy_tolerance_eV,
        "closed_tolerance_eV": report.closed_tolerance_eV,
        "verdict_rule": VERDICT_RULE,
        "crossings": report.crossings,
        "energy_zero": zero_entry(kind, zero),
        "points": points,
    }


def _gap_value(x: float) -> str:
    """A splitting in eV: three decimals, or two significant figures below 0.5 meV; rounding
    noise below 1e-9 eV reads 0."""
    if abs(x) < 1e-9:
        x = 0.0
    if x != 0.0 and abs(x) < 5e-4:
        return f"{x:.1e}"
    return f"{round(float(x), 3) + 0.0:.3f}"  # + 0.0 turns -0.000 into 0.000


def _energy_cell(x: float) -> str:
    """An energy in eV to three decimals, without a negative zero."""
    return f"{round(float(x), 3) + 0.0:.3f}"


def _gap_list(values: np.ndarray) -> str:
    return "\n".join(_gap_value(x) for x in values) if len(values) else "—"


def _coupling_summary(group, a_A: float) -> str:
    """Distinct couplings of a group by shell: ``(1,1,1) 0.244`` or ``(2,0,0) 0 SF``."""

    seen: dict[tuple, str] = {}
    for m, g, s, v, r in zip(group.coupling_miller, group.coupling_g_cart_invA,
                             group.coupling_shell_g2, group.coupling_eV, group.coupling_reason,
                             strict=True):
        key = (round(float(s), 6), round(float(abs(v)), 4), r)
        if key not in seen:
            label = _vector_label(g, m, a_A)
            seen[key] = (f"{label} {abs(v):.3f}" if r == REASON_COUPLED
                         else f"{label} 0 {REASON_TAGS.get(r, r)}")
    return "\n".join(seen[k] for k in sorted(seen))


def _verdict_cell(v) -> str:
    """``holds`` or ``FAILS``, with the worst splitting error (eV, and % of the exact one)."""
    rel = "" if v.relative_error is None else f" ({100 * v.relative_error:+.0f} %)"
    return f"{'holds' if v.holds else 'FAILS'}\n{_gap_value(v.error_eV)}{rel}"


def gap_table(report, energy_zero_eV: float = 0.0
              ) -> tuple[list[tuple[str, list[str], list[list[str]]]], list[str]]:
    """The terminal tables of ``bandpert gaps``: couplings, then gaps with verdicts; footnotes.

    Returns ``([(title, columns, rows), …], notes)``. E0, the free-electron energy of a group,
    is given from ``energy_zero_eV`` (absolute); splittings are differences and need no zero.
    The first table lists, per degenerate
    group, the Fourier coefficients V(G − G′) that couple it (or why they vanish). The second
    lists, for every splitting that is open in the exact levels, the first-order, second-order
    and exact splitting (eV) at the same position in the group, each order's verdict
    (:class:`bandpert.physics.nfe_gaps.GapVerdict`: ``holds`` or ``FAILS``, with the worst
    splitting error in eV and in % of the exact splitting), the exact multiplets and the lowest
    order that opens every open splitting.
    """

    ccols = ["point", "E0 (eV)", "g", "V(G−G′) (eV)", "why closed"]
    gcols = ["point", "E0 (eV)", "g", "1st", "2nd", "exact", "1st verdict", "2nd verdict",
             "exact levels", "opens at"]
    crows: list[list[str]] = []
    grows: list[list[str]] = []
    doubtful = False
    for p in report.points:
        label = p.label
        if p.kind == "crossing":
            label = f"{p.segment[0]}→{p.segment[1]} {p.segment_fraction:.3f}"
        if not p.groups:
            crows.append([label, "—", "1", "", "no degeneracy"])
            grows.append([label, "—", "1", "", "", "", "", "", "", "no degeneracy"])
            continue
        for i, g in enumerate(p.groups):
            o = g.open_gaps
            if g.status == "closed":
                cells = ["—", "—", "closed"]
                opens = "closed"
            else:
                cells = [_gap_list(g.first_order_gaps_eV[o]), _gap_list(g.second_order_gaps_eV[o]),
                         _gap_list(g.exact_gaps_eV[o])]
                opens = g.status.removeprefix("opens at ")
            why = ""
            if g.uncoupled:
                opens += " (uncoupled)"
                why = "uncoupled"
            levels = "+".join(str(x) for x in g.exact_multiplets)
            if g.poor_match:
                levels += " ?"
                doubtful = True
            head = [label if i == 0 else "", _energy_cell(g.free_electron_eV - energy_zero_eV),
                    str(g.degeneracy)]
            crows.append([*head, _coupling_summary(g, report.material.a_A), why])
            grows.append([*head, *cells, *(_verdict_cell(v) for v in g.verdicts), levels, opens])
    groups = [g for p in report.points for g in p.groups]
    used = {r for g in groups for r in g.coupling_reason}
    notes = [f"verdicts: {VERDICT_RULE} (worst splitting error shown, eV and % of the exact "
             "splitting)"]
    if any(not v.holds for g in groups for v in g.verdicts):
        failing = sum(not v.holds for g in groups for v in g.verdicts)
        notes.append(f"FAILS: {failing} (group, order) predictions miss the exact splitting")
    if used & set(REASON_TAGS):
        notes.append("V(G−G′) = 0 because: " + "; ".join(
            f"{t}: {r}" for r, t in REASON_TAGS.items() if r in used))
    if any(g.uncoupled for g in groups):
        notes.append("uncoupled: V(G−G′) = 0 for every pair of the group, so nothing opens at "
                     "first order")
    if any(g.status == "closed" for g in groups):
        notes.append(f"closed: every exact splitting below {report.closed_tolerance_eV * 1e6:g} "
                     "µeV")
    if doubtful:
        notes.append(f"?: a matched exact state has less than {POOR_MATCH_WEIGHT:g} of its "
                     "weight on the group's plane waves (the match by sorted position is "
                     "doubtful)")
    return [("couplings of each degenerate group", ccols, crows),
            ("gaps: first and second order against exact", gcols, grows)], notes


def _band_masses_entry(m, energy_zero_eV: float, location: str) -> dict[str, Any]:
    entry: dict[str, Any] = {
        "label": m.label,
        "band": m.band + 1,
        "location": location,
        "k_frac": m.k_frac,
        "k_cart_invA": m.k_cart_invA,
        "energy_eV": m.energy_eV - energy_zero_eV,
        "energy_absolute_eV": m.energy_eV,
        "degenerate_bands": (m.degenerate_bands + 1).tolist(),
        "valleys": m.valleys,
        "dos_mass_m0": m.dos_mass,
        "conductivity_mass_m0": m.conductivity_mass,
        "effective_dos_cm3": m.effective_dos_cm3,
        "temperature_K": m.temperature_K,
        "sum_over_states": None,
        "finite_difference": None,
        "convergence": None,
        "degenerate_edge": None,
        "critical_point": _critical_point_entry(m.critical_point, energy_zero_eV),
        "summary": m.summary,
    }
    if m.tensor is not None:
        entry["sum_over_states"] = {
            "inverse_mass_tensor": m.tensor.inverse_mass,
            "principal_masses_m0": _finite_or_none(m.tensor.principal_masses)[0],
            "principal_axes": m.tensor.principal_axes.T,
            "curvature_sign": m.tensor.curvature_sign,
        }
        entry["finite_difference"] = {"inverse_mass_tensor": m.finite_difference,
                                      "relative_difference": m.relative_difference}
        entry["convergence"] = {"states_kept": m.convergence_counts,
                                "principal_masses_m0": m.convergence_masses}
    if m.edge is not None:
        e = m.edge
        entry["degenerate_edge"] = {
            "bands": (e.bands + 1).tolist(),
            "dkk_L": None if e.dkk_LMN is None else e.dkk_LMN[0],
            "dkk_M": None if e.dkk_LMN is None else e.dkk_LMN[1],
            "dkk_N": None if e.dkk_LMN is None else e.dkk_LMN[2],
            "dkk_LMN_with_free_electron": (None if e.dkk_LMN is None
                                           else list(dkk_with_free_electron(*e.dkk_LMN))),
            "luttinger_gamma": None if e.luttinger is None else list(e.luttinger),
            "direction_inverse_masses": {k: v for k, v in e.direction_curvatures.items()},
            "direction_masses_m0": {k: _finite_or_none(1.0 / np.abs(v))[0] for k, v in
                                    e.direction_curvatures.items()},
            "band_dos_masses_m0": m.band_dos_masses,
        }
    return entry


def _critical_point_entry(cp, energy_zero_eV: float) -> dict[str, Any]:
    near = cp.nearest
    return {
        "kind": cp.kind,
        "saddle_index": cp.saddle_index,
        "principal_inverse_masses": cp.curvatures,
        "principal_axes": None if cp.axes is None else cp.axes.T,
        "degeneracy": cp.degeneracy or None,
        "run_splittings_eV": _finite_or_none(cp.run_splittings_eV)[0],
        "centred_splittings_eV": _finite_or_none(cp.centred_splittings_eV),
        "gradient_eV_A": cp.gradient_eV_A,
        "nearest_extremum": None if near is None else {
            "kind": near.kind, "k_frac": near.k_frac, "k_cart_invA": near.k_cart_invA,
            "energy_eV": near.energy_eV - energy_zero_eV,
            "energy_absolute_eV": near.energy_eV, "beyond_point_eV": near.below_eV,
            "distance_invA": near.distance_invA, "along_fraction": near.along_fraction},
        "warning": cp.warning or None,
    }


def deformation_entry(dp, note: str) -> dict[str, Any]:
    """The ``deformation_potentials`` of ``bandpert masses`` (README)."""
    lmn = dp.valence_lmn_eV
    return {
        "gap_hydrostatic_eV": dp.gap_hydrostatic_eV,
        "conduction_valley": dp.conduction_valley,
        "xi_u_eV": dp.xi_u_eV,
        "xi_d_plus_xi_u_over_3_minus_a_v_eV": dp.xi_d_plus_xi_u_over_3_minus_a_v_eV,
        "valence_l_m_n_eV": None if lmn is None else list(lmn),
        "b_eV": dp.b_eV,
        "d_eV": dp.d_eV,
        "form_factors": note,
        "internal_strain_zeta": dp.internal_strain_zeta,
        "internal_strain_source": dp.internal_strain_source,
        "strain": "first order at the reference lattice (where the continuous v(q) equals the "
                  "tabulated form factors); under shear the two atoms of a diamond or "
                  "zincblende cell shift by Kleinman's internal strain (internal_strain_zeta)",
    }


def masses_results(entries, energy_zero_eV: float, energy_zero_kind: str,
                   locations: list[str], kp_parameters: dict[str, Any] | None,
                   deformation: tuple | None = None) -> dict[str, Any]:
    """The ``results`` of ``bandpert masses`` (keys documented in the README)."""
    return {
        "deformation_potentials": None if deformation is None else deformation_entry(
            *deformation),
        "energy_zero": zero_entry(energy_zero_kind, energy_zero_eV),
        "masses": [_band_masses_entry(m, energy_zero_eV, loc)
                   for m, loc in zip(entries, locations, strict=True)],
        "kp_parameters": kp_parameters,
    }


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
        models[name] = entry
    results: dict[str, Any] = {"models": models,
                               "reference_masses_m0": analysis.reference_masses_m0,
                               "parameters": analysis.parameters.as_dict(),
                               "energy_zero": zero_entry(analysis.energy_zero, 0.0)}
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


def column_unit(name: str) -> str:
    """The unit of a sweep column, read off its name (README, "bandpert sweep")."""
    if name.endswith("_eV"):
        return "eV"
    if name.endswith("_frac"):
        return "fractions of the reciprocal vectors"
    if name.endswith("_valleys"):
        return "count"
    if "_gamma" in name:
        return "dimensionless (Luttinger)"
    if "_m" in name or name.endswith("_mass"):
        return "m0"
    if name == "basis_size":
        return "plane waves"
    return ""


def is_sweep_level(name: str) -> bool:
    """Whether a sweep column is an energy level (band edge, level at a point)."""
    return name in ("valence_max_eV", "conduction_min_eV") or (
        name.startswith(("lower_", "upper_")) and name.endswith("_eV")
        and not name.endswith("_absolute_eV"))


def sweep_columns(result) -> dict[str, np.ndarray]:
    """The numeric columns of a sweep as every output gives them.

    Energy levels (:func:`is_sweep_level`) are measured from each point's own energy zero
    (column ``energy_zero_absolute_eV``, kind in the text column ``energy_zero``: the
    valence-band maximum on the path for a semiconductor, by the rule of every command), and
    kept absolute as ``<name>_absolute_eV`` beside them.
    """
    cols = dict(result.columns)
    zero = cols.get("energy_zero_absolute_eV")
    if zero is None:
        return cols
    out: dict[str, np.ndarray] = {}
    for name, v in cols.items():
        if is_sweep_level(name):
            out[name] = v - zero
            out[name.removesuffix("_eV") + "_absolute_eV"] = v
        else:
            out[name] = v
    return out


def sweep_zero_note(result) -> str:
    """The sweep's energy zero in words (terminal, CSV header, JSON, figure)."""
    kinds = [k for k in dict.fromkeys(result.text.get("energy_zero", [])) if k]
    if not kinds:
        return "no energy levels (masses only)"
    if kinds == ["absolute"]:
        return ("energies in eV from the model's own zero (V(G = 0) as given; no electron "
                "count, so no band edge to measure from)")
    named = " or ".join("model zero" if k == "absolute" else k for k in kinds)
    return (f"energy levels in eV from each point's own {named} (text column energy_zero; its "
            "absolute value in energy_zero_absolute_eV); the absolute levels are kept as "
            "*_absolute_eV; gaps are differences")


def sweep_results(result) -> dict[str, Any]:
    """The ``results`` of ``bandpert sweep`` (keys documented in the README)."""
    spec = result.spec
    keys = [a.key for a in spec.axes]
    columns = sweep_columns(result)
    numeric = {k: _finite_or_none(v)[0] for k, v in columns.items()}
    return {
        "parameters": [{"key": a.key, "values": a.values} for a in spec.axes],
        "points": result.n_points,
        "values": result.values,
        "columns": numeric,
        "units": {k: column_unit(k) for k in columns},
        "text": result.text,
        "failures": [{"values": dict(zip(keys, f.values, strict=True)), "error": f.error,
                      "input_error": f.user_error} for f in result.failures],
        "form_factors": result.form_factor_note,
        "virtual_crystal": any(a.kind == "alloy" for a in spec.axes),
        "energy_zero": {"name": "each point's own (text.energy_zero)",
                        "absolute_eV": numeric.get("energy_zero_absolute_eV"),
                        "note": sweep_zero_note(result)},
    }


def sweep_table(result) -> tuple[list[str], list[str], list[list[str]]]:
    """Header lines, column names and formatted rows of the sweep CSV (empty = no value)."""
    spec = result.spec
    columns = sweep_columns(result)
    names = list(columns)
    units = "; ".join(f"{n} [{column_unit(n)}]" for n in names if column_unit(n))
    header = [f"bandpert {__version__} sweep: {spec.source}",
              f"varied: {', '.join(a.key for a in spec.axes)}; {result.form_factor_note}",
              f"{sweep_zero_note(result)}; units: {units}",
              f"{len(result.failures)} of {result.n_points} points failed (empty cells)"]
    cols = [a.key for a in spec.axes] + names + list(result.text)
    rows = []
    for i in range(result.n_points):
        row = [f"{x:.10g}" for x in result.values[i]]
        row += ["" if not np.isfinite(columns[n][i]) else f"{columns[n][i]:.10g}"
                for n in names]
        row += [result.text[t][i] for t in result.text]
        rows.append(row)
    return header, cols, rows


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
