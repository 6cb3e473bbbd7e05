"""Irreducible-representation labels as JSON and as a terminal table (keys in the README)."""

from __future__ import annotations

from typing import Any

from ..physics.van_hove import LevelCriticalPoint, PointCriticalPoints
from ..symmetry.labels import PointSymmetry

__all__ = ["symmetry_results", "symmetry_rows"]


#: How the critical points are classified, in words (the ``critical_points_method`` key).
CRITICAL_POINTS_METHOD = (
    "van Hove type per band from the Hessian of a non-degenerate level (sum over every state of "
    "the k-centred basis); a degenerate level has no Hessian per band: a linear splitting makes "
    "it a crossing, else each band is classified by its curvatures in the second-order block "
    "over 200 directions (block: all up M0, all down M3, mixed a saddle of index 1 or 2 where "
    "the sign pattern on the sphere is a quadratic form's, else a warped saddle without index)")

#: The same with spin–orbit or nonlocal terms (∂H/∂k from matrix differences, Kramers pairs).
CRITICAL_POINTS_METHOD_K_DEPENDENT = CRITICAL_POINTS_METHOD + (
    "; spin–orbit and nonlocal terms: ∂H/∂k and ∂²H/∂k∂k by central differences of the model's "
    "H(k) on the k-centred basis, and a Kramers pair whose block is a multiple of the identity "
    "is one band carried twice, with one Hessian; a level where H(k) itself has a kink (its "
    "second difference along e_a + e_b differs from what those along the axes and the mixed "
    "one give) is non-analytic, not classified")


def critical_point_results(c: LevelCriticalPoint) -> dict[str, Any]:
    """One level's ``critical_point`` entry (keys in the README)."""
    return {
        "summary": c.summary,
        "method": c.method,
        "gradient_eV_A": c.gradient_eV_A,
        "linear_splitting_eV_A": c.linear_splitting_eV_A,
        "hessian_eV_A2": c.hessian_eV_A2,
        "symmetry_residual": c.symmetry_residual,
        "bands": [{"band": b.band, "kind": b.kind, "van_hove": b.van_hove,
                   "saddle_index": b.saddle_index,
                   "principal_m0_over_mstar": b.principal_m0_over_mstar,
                   "curvature_range_m0_over_mstar": b.curvature_range_m0_over_mstar}
                  for b in c.bands],
    }


def symmetry_results(points: tuple[PointSymmetry, ...], energy_zero_eV: float = 0.0,
                     note: str = "", critical: tuple[PointCriticalPoints, ...] = ()
                     ) -> dict[str, Any]:
    """The ``results.irreps`` section: labels of the levels at each labelled point.

    Energies from the run's energy zero (``energy_zero_eV``, absolute), the absolute values
    kept as ``energy_absolute_eV``, as in every document. ``note`` says why there are no
    points (:func:`bandpert.symmetry.labels.unlabelled_reason`). With ``critical``
    (:func:`bandpert.physics.van_hove.label_and_classify`, one per point) each level carries
    its ``critical_point``.
    """
    first = points[0] if points else None
    by_point = {c.point: c for c in critical}
    cnote = next((c.note for c in critical if c.note), "")

    def levels(p: PointSymmetry) -> list[dict[str, Any]]:
        cp = by_point.get(p.point)
        crit = {c.first_band: c for c in cp.levels} if cp is not None else {}
        return [{"label": lv.label, "energy_eV": lv.energy_eV - energy_zero_eV,
                 "energy_absolute_eV": lv.energy_eV,
                 "first_band": lv.first_band, "degeneracy": lv.degeneracy,
                 "accidental": lv.accidental, "time_reversal": lv.time_reversal,
                 **({"critical_point": critical_point_results(crit[lv.first_band])}
                    if lv.first_band in crit else {})}
                for lv in p.levels]

    return {
        "space_group": first.space_group if first else None,
        "origin": first.origin if first else None,
        "note": first.note if first else note,
        "basis": "k-centred: ħ²|k+G|²/2m0 ≤ cutoff at each point",
        **({"critical_points_method": CRITICAL_POINTS_METHOD_K_DEPENDENT
            if any(c.matrix_differences for c in critical) else CRITICAL_POINTS_METHOD,
            "critical_points_note": cnote} if critical else {}),
        "points": [{
            "point": p.point,
            "k_frac": p.k_frac,
            "little_cogroup_order": p.little_cogroup_order,
            "irreps": [{"name": n, "dimension": d, "herring": h} for n, d, h in
                       zip(p.irrep_names, p.irrep_dimensions, p.herring, strict=True)],
            "levels": levels(p),
        } for p in points],
    }


def symmetry_rows(points: tuple[PointSymmetry, ...], zero_eV: float,
                  critical: tuple[PointCriticalPoints, ...] = ()
                  ) -> tuple[str, list[str], list[list[str]]]:
    """Title, columns and rows: per point, its levels from the bottom with energies from the zero.

    No rows when there are no points (1D and 2D models).
    An accidental degeneracy is marked ``(acc.)``, a level stuck by time reversal ``(TR)``.
    With ``critical`` each level is followed by its van Hove type in brackets (``[M0]``,
    ``[M3 (block)]``, ``[crossing]``, ``[not stationary]``).
    """
    first = points[0] if points else None
    origin = f"; origin: {first.origin}" if first and first.origin else ""
    title = f"symmetry labels at the labelled points{origin}"
    by_point = {c.point: {lv.first_band: lv for lv in c.levels} for c in critical}
    rows = []
    for p in points:
        parts = []
        crit = by_point.get(p.point, {})
        kinds = {crit[lv.first_band].summary for lv in p.levels if lv.first_band in crit}
        once = len(kinds) == 1 and len(p.levels) > 2  # e.g. K: every level not stationary
        for lv in p.levels:
            mark = " (acc.)" if lv.accidental else " (TR)" if lv.time_reversal else ""
            kind = (f" [{crit[lv.first_band].summary}]" if lv.first_band in crit and not once
                    else "")
            parts.append(f"{lv.label}{mark} {round(lv.energy_eV - zero_eV, 3) + 0.0:+.3f}"
                         f"{kind}")
        rows.append([p.point, ", ".join(parts) + (f" [every level: {kinds.pop()}]"
                                                   if once else "")])
    what = "label, eV from the zero, [van Hove type]" if by_point else "label, eV from the zero"
    if any(c.note for c in critical):
        title += f"; {next(c.note for c in critical if c.note)}"
    return title, ["point", f"levels from the bottom ({what})"], rows
