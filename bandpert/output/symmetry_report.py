"""Irreducible-representation labels as JSON and as a terminal table (keys in the README)."""

from __future__ import annotations

from typing import Any

from ..symmetry.labels import PointSymmetry

__all__ = ["symmetry_results", "symmetry_rows"]


def symmetry_results(points: tuple[PointSymmetry, ...], energy_zero_eV: float = 0.0,
                     note: str = "") -> dict[str, Any]:
    """The ``results.irreps`` section: labels of the levels at each labelled point.

    Energies from the run's energy zero (``energy_zero_eV``, absolute), the absolute values
    kept as ``energy_absolute_eV``, as in every document. ``note`` says why there are no
    points (:func:`bandpert.symmetry.labels.unlabelled_reason`).
    """
    first = points[0] if points else None
    return {
        "space_group": first.space_group if first else None,
        "origin": first.origin if first else None,
        "note": first.note if first else note,
        "basis": "k-centred: ħ²|k+G|²/2m0 ≤ cutoff at each point",
        "points": [{
            "point": p.point,
            "k_frac": p.k_frac,
            "little_cogroup_order": p.little_cogroup_order,
            "irreps": [{"name": n, "dimension": d, "herring": h} for n, d, h in
                       zip(p.irrep_names, p.irrep_dimensions, p.herring, strict=True)],
            "levels": [{"label": lv.label, "energy_eV": lv.energy_eV - energy_zero_eV,
                        "energy_absolute_eV": lv.energy_eV,
                        "first_band": lv.first_band, "degeneracy": lv.degeneracy,
                        "accidental": lv.accidental, "time_reversal": lv.time_reversal}
                       for lv in p.levels],
        } for p in points],
    }


def symmetry_rows(points: tuple[PointSymmetry, ...], zero_eV: float
                  ) -> tuple[str, list[str], list[list[str]]]:
    """Title, columns and rows: per point, its levels from the bottom with energies from the zero.

    No rows when there are no points (1D and 2D models).
    An accidental degeneracy is marked ``(acc.)``, a level stuck by time reversal ``(TR)``.
    """
    first = points[0] if points else None
    origin = f"; origin: {first.origin}" if first and first.origin else ""
    title = f"symmetry labels at the labelled points{origin}"
    rows = []
    for p in points:
        parts = []
        for lv in p.levels:
            mark = " (acc.)" if lv.accidental else " (TR)" if lv.time_reversal else ""
            parts.append(f"{lv.label}{mark} {round(lv.energy_eV - zero_eV, 3) + 0.0:+.3f}")
        rows.append([p.point, ", ".join(parts)])
    return title, ["point", "levels from the bottom (label, eV from the zero)"], rows
