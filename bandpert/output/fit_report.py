"""The JSON ``results`` of ``bandpert fit`` (keys documented in the README, "bandpert fit")."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..input.key_ranges import KeyRange
from ..physics.fit_targets import FitSpec
from ..runs.fit import FitResult


def uncertainty_text(uncertainty: float, at_bound: str) -> str:
    """The ± 1σ cell of the terminal table: "at bound", "undetermined" or the value."""
    if at_bound:
        return "at bound"
    return "undetermined" if uncertainty != uncertainty else f"{uncertainty:.2g}"


def _range(rng: KeyRange | None) -> dict[str, Any] | None:
    """A key's accepted range for the JSON (an unbounded end as null)."""
    if rng is None:
        return None
    return {"low": rng.lo if math.isfinite(rng.lo) else None,
            "high": rng.hi if math.isfinite(rng.hi) else None,
            "open_low": rng.open_low, "open_high": rng.open_high}


def fit_results(result: FitResult, spec: FitSpec, written: str) -> dict[str, Any]:
    """Parameters (start, fitted, uncertainty, range, at bound), correlations, rank, and every
    target."""
    n = len(result.keys)
    ranges = result.ranges or (None,) * n
    sides = result.at_bound or ("",) * n
    return {
        "parameters": [{"key": k, "start": float(s), "fitted": float(v),
                        "uncertainty": None if np.isnan(u) or side else float(u),
                        "range": _range(rng), "at_bound": side or None}
                       for k, s, v, u, rng, side in zip(result.keys, result.start,
                                                        result.values, result.uncertainties,
                                                        ranges, sides, strict=True)],
        "at_bound": list(result.keys_at_bound),
        "correlations": [[None if not np.isfinite(c) else float(c) for c in row]
                         for row in result.correlations],
        "jacobian_rank": result.rank,
        "undetermined": list(result.undetermined),
        "targets": [{"name": t.name, "quantity": t.quantity, "unit": t.unit,
                     "value": t.value, "tolerance": t.tolerance, "model": float(m),
                     "residual": float(r), "within_tolerance": bool(abs(r) <= 1.0),
                     "source": t.source}
                    for t, m, r in zip(spec.targets, result.model_values, result.residuals,
                                       strict=True)],
        "warnings": list(result.warnings),
        "cost": result.cost,
        "evaluations": result.evaluations,
        "material_file": written,
    }
