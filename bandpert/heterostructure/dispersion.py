"""In-plane dispersion and in-plane masses of the subbands (multiband models).

For each in-plane wave vector k∥ = t û (û along [100] or [110], t from 0 to ``k_max_invA``) the
multiband operator of :mod:`.multiband` is solved for the requested levels on each side of the
gap: the lowest conduction subbands and the highest valence subbands, sorted by energy at each
k∥ (no tracking through anticrossings: the valence subbands of a well anticross, and sorted
order is what a table can state without guessing). The in-plane mass of each subband at
k∥ = 0 is m0/m∥ = (E(δ) − E(0))/(ħ²δ²/2m0) with δ = :data:`MASS_STEP_INVA` (positive for an
electron-like subband, negative for a hole-like one; CONVENTIONS.md keeps the sign).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from ..input.structure_file import Structure
from ..kp import unit_vector
from ..units import HBAR2_OVER_2M0_EV_A2 as C
from .grid import build_grid, layer_edges
from .multiband import MULTIBAND_MODELS, layer_matrices, multiband_levels

__all__ = ["IN_PLANE_DIRECTIONS", "MASS_STEP_INVA", "InPlaneDispersion", "in_plane_dispersion"]

#: In-plane directions of a [001] structure.
IN_PLANE_DIRECTIONS: tuple[str, ...] = ("100", "110")

#: Step of the in-plane mass, Å⁻¹ (far inside the anticrossings of a 5–20 nm well, which
#: start near 0.01 Å⁻¹; the mass changes by under 10⁻⁴ between 0.001 and 0.002 Å⁻¹).
MASS_STEP_INVA = 0.001

FloatArray = NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class InPlaneDispersion:
    """Subbands along in-plane directions.

    Attributes
    ----------
    model : str
    k_invA : ndarray (n_k,)
        |k∥| along each direction.
    conduction_eV, valence_eV : dict
        Direction label → (n_k, n_levels) energies (common scale); conduction upward from the
        lowest, valence downward from the highest (empty arrays for a valence-only model).
    in_plane_mass_m0 : dict
        Direction label → {"conduction": (n_levels,), "valence": (n_levels,)} signed m∥/m0.
    """

    model: str
    k_invA: FloatArray
    conduction_eV: dict[str, FloatArray]
    valence_eV: dict[str, FloatArray]
    in_plane_mass_m0: dict[str, dict[str, FloatArray]]


def in_plane_dispersion(structure: Structure, model: str = "eight-band",
                        k_max_invA: float = 0.05, n_k: int = 21, n_levels: int = 3,
                        spacing_nm: float = 0.1) -> InPlaneDispersion:
    """The subbands along [100] and [110] up to ``k_max_invA`` (module docstring)."""
    if model not in MULTIBAND_MODELS:
        raise InputError(f"in-plane dispersion needs a multiband model "
                         f"({', '.join(MULTIBAND_MODELS)}), not '{model}'", key="model")
    if not (0 < k_max_invA <= 0.5) or not 2 <= n_k <= 500 or not 1 <= n_levels <= 50:
        raise InputError("expected 0 < k_max_invA ≤ 0.5 Å⁻¹, 2 ≤ n_k ≤ 500 and 1 to 50 "
                         "levels", key="k_max_invA")
    grid = build_grid(structure, spacing_nm)
    edges = layer_edges(structure)
    mats = layer_matrices(structure, model)
    up = min(e.conduction_eV for e in edges) - 1e-3
    down = max(max(e.heavy_hole_eV, e.light_hole_eV) for e in edges) + 1e-3
    k = np.linspace(0.0, k_max_invA, n_k)
    cond, val, masses = {}, {}, {}
    for label in IN_PLANE_DIRECTIONS:
        u = unit_vector(label)[:2]
        ks = np.concatenate([k, [MASS_STEP_INVA]])
        c_rows, v_rows = [], []
        for t in ks:
            if model == "eight-band":
                c_rows.append(multiband_levels(grid, mats, model, n_levels, up, "up",
                                               k_par_invA=t * u)[0])
            v_rows.append(multiband_levels(grid, mats, model, n_levels, down, "down",
                                           k_par_invA=t * u)[0])
        c = np.array(c_rows) if c_rows else np.zeros((ks.size, 0))
        v = np.array(v_rows)
        cond[label], val[label] = c[:-1], v[:-1]
        masses[label] = {"conduction": C * MASS_STEP_INVA**2 / (c[-1] - c[0]),
                         "valence": C * MASS_STEP_INVA**2 / (v[-1] - v[0])}
    return InPlaneDispersion(model, k, cond, val, masses)
