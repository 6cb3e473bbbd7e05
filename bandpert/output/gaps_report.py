"""The documents of ``bandpert gaps``: JSON results and the terminal tables."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..physics.bands import BandStructure
from ..physics.nfe_gaps import POOR_MATCH_WEIGHT, REASON_COUPLED, REASON_TAGS, VERDICT_RULE
from .energy_zero import with_absolute, zero_entry


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
        "symmetry": None if group.symmetry is None else {
            "irreps": list(group.symmetry.irreps),
            "dimensions": list(group.symmetry.dimensions),
            "allowed_levels": group.symmetry.allowed_levels,
            "exact_labels": list(group.symmetry.exact_labels),
            "closed_by": list(group.closed_by),
            "verdict": group.symmetry_verdict,
        },
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

    ccols = ["point", "E0 (eV)", "g", "V(G−G′) (eV)", "why closed", "symmetry"]
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
            crows.append([label, "—", "1", "", "no degeneracy", ""])
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
            crows.append([*head, _coupling_summary(g, report.material.a_A), why,
                          "" if g.symmetry is None else g.symmetry_verdict])
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
    if any(g.symmetry is not None for g in groups):
        notes.append("symmetry: the irreps of the group's plane waves; the potential mixes only "
                     "states of one irrep, so a splitting inside an irrep is closed by symmetry at "
                     "every order, and one between irreps that stays closed is closed by the "
                     "potential (structure factor, range) or accidental")
    if doubtful:
        notes.append(f"?: a matched exact state has less than {POOR_MATCH_WEIGHT:g} of its "
                     "weight on the group's plane waves (the match by sorted position is "
                     "doubtful)")
    return [("couplings of each degenerate group", ccols, crows),
            ("gaps: first and second order against exact", gcols, grows)], notes
