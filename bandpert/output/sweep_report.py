"""The documents of ``bandpert sweep``: columns as every output gives them, JSON and CSV."""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from .report import finite_or_none


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
    numeric = {k: finite_or_none(v)[0] for k, v in columns.items()}
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
