"""The JSON ``results`` of ``bandpert fit`` (keys documented in the README, "bandpert fit")."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..physics.fit_targets import FitSpec
from ..runs.fit import FitResult


def fit_results(result: FitResult, spec: FitSpec, written: str) -> dict[str, Any]:
    """Parameters (start, fitted, uncertainty), correlations, rank, and every target."""
    return {
        "parameters": [{"key": k, "start": float(s), "fitted": float(v),
                        "uncertainty": None if np.isnan(u) else float(u)}
                       for k, s, v, u in zip(result.keys, result.start, result.values,
                                             result.uncertainties, strict=True)],
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
