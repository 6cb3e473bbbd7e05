"""In-plane dispersion and in-plane masses of the subbands (multiband models).

For each in-plane wave vector k∥ = t û (û along two in-plane directions of the growth axis,
:data:`IN_PLANE_DIRECTIONS`: [100] and [110] for [001] growth; t from 0 to ``k_max_invA``) the
multiband operator of :mod:`.multiband` is solved for the requested levels on each side of the
gap: the lowest conduction subbands and the highest valence subbands, sorted by energy at each
k∥ (no tracking through anticrossings: the valence subbands of a well anticross, and sorted
order is what a table can state without guessing). The in-plane mass of each subband at
k∥ = 0 is m0/m∥ = (E(δ) − E(0))/(ħ²δ²/2m0) with δ = :data:`MASS_STEP_INVA` (positive for an
electron-like subband, negative for a hole-like one; CONVENTIONS.md keeps the sign).

The points are independent: :func:`in_plane_dispersion` takes a ``map_points`` callable
(``map_points(point_levels, tasks) → list``, serial by default) so that
:mod:`bandpert.runs.in_plane` can spread them over the Dask engine without this module
knowing about engines.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from ..input.structure_file import Structure
from ..units import HBAR2_OVER_2M0_EV_A2 as C
from .grid import Grid, build_grid, layer_edges
from .multiband import MULTIBAND_MODELS, LayerMatrices, layer_matrices, multiband_levels

__all__ = ["IN_PLANE_DIRECTIONS", "MASS_STEP_INVA", "DispersionSetup", "InPlaneDispersion",
           "dispersion_setup", "in_plane_dispersion", "point_levels"]

#: Growth direction → its two in-plane directions (Miller labels) and their unit vectors in
#: the structure's frame (:func:`~.grid.growth_frame`). [001]: [100] and [110] (the valence
#: warping's extremes); [110]: [-110] and [001]; [111]: [1-10] and [11-2].
IN_PLANE_DIRECTIONS: dict[str, tuple[tuple[str, tuple[float, float]], ...]] = {
    "001": (("100", (1.0, 0.0)), ("110", (math.sqrt(0.5), math.sqrt(0.5)))),
    "110": (("-110", (1.0, 0.0)), ("001", (0.0, 1.0))),
    "111": (("1-10", (1.0, 0.0)), ("11-2", (0.0, 1.0)))}

#: Step of the in-plane mass, Å⁻¹ (far inside the anticrossings of a 5–20 nm well, which
#: start near 0.01 Å⁻¹; the mass changes by under 10⁻⁴ between 0.001 and 0.002 Å⁻¹).
MASS_STEP_INVA = 0.001

#: Extra Kramers pairs asked of the Lanczos solver beyond the wanted ones at each k∥
#: (shift-invert about a band edge converges the nearest levels first; one pair instead of the
#: k∥ = 0 solver's four made a point about 40 % cheaper in CPU time on the 20 nm benchmark well,
#: 23 against 39 ms for three conduction pairs, with the same energies to the solver's 1e-12).
EXTRA_PAIRS_PER_POINT = 1

FloatArray = NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class InPlaneDispersion:
    """Subbands along in-plane directions.

    Attributes
    ----------
    model : str
    name : str
        The structure's name.
    growth : str
        The growth direction ("001", "110", "111").
    k_invA : ndarray (n_k,)
        |k∥| along each direction.
    conduction_eV, valence_eV : dict
        Direction label (:data:`IN_PLANE_DIRECTIONS`, first one first) → (n_k, n_levels)
        energies (common scale); conduction upward from the
        lowest, valence downward from the highest (empty arrays for a valence-only model).
    in_plane_mass_m0 : dict
        Direction label → {"conduction": (n_levels,), "valence": (n_levels,)} signed m∥/m0.
    """

    model: str
    name: str
    growth: str
    k_invA: FloatArray
    conduction_eV: dict[str, FloatArray]
    valence_eV: dict[str, FloatArray]
    in_plane_mass_m0: dict[str, dict[str, FloatArray]]


@dataclass(frozen=True, eq=False)
class DispersionSetup:
    """What every k∥ point needs (small and picklable: the grid and each layer's matrices).

    Attributes
    ----------
    grid : Grid
    layers : list of LayerMatrices
    model : str
    n_levels : int
    up_eV, down_eV : float
        Shifts just below the lowest conduction edge and just above the highest valence edge.
    """

    grid: Grid
    layers: list[LayerMatrices]
    model: str
    n_levels: int
    up_eV: float
    down_eV: float


def dispersion_setup(structure: Structure, model: str = "eight-band", n_levels: int = 3,
                     spacing_nm: float = 0.1) -> DispersionSetup:
    """Check the arguments and build the :class:`DispersionSetup`.

    Raises
    ------
    InputError
        A one-band model, a level count outside 1–50, or a bad grid.
    """
    if model not in MULTIBAND_MODELS:
        raise InputError(f"in-plane dispersion needs a multiband model "
                         f"({', '.join(MULTIBAND_MODELS)}), not '{model}'", key="model")
    if not 1 <= n_levels <= 50:
        raise InputError(f"expected 1 to 50 levels per band, got {n_levels}", key="n_levels")
    grid = build_grid(structure, spacing_nm)
    edges = layer_edges(structure)
    mats = layer_matrices(structure, model)
    up = min(e.conduction_eV for e in edges) - 1e-3
    down = max(max(e.heavy_hole_eV, e.light_hole_eV) for e in edges) + 1e-3
    return DispersionSetup(grid, mats, model, n_levels, up, down)


def point_levels(task: tuple[DispersionSetup, FloatArray]) -> tuple[FloatArray, FloatArray]:
    """(conduction, valence) levels at one k∥ = (kx, ky) in Å⁻¹ (a module-level function:
    engine workers import it by name). The conduction array is empty for valence-only models.
    """
    setup, k_par = task
    args = (setup.grid, setup.layers, setup.model, setup.n_levels)
    extra = EXTRA_PAIRS_PER_POINT
    cond = np.zeros(0)
    if setup.model == "eight-band":
        cond = multiband_levels(*args, setup.up_eV, "up", k_par_invA=k_par, extra_pairs=extra)[0]
    val = multiband_levels(*args, setup.down_eV, "down", k_par_invA=k_par, extra_pairs=extra)[0]
    return cond, val


def _serial(function: Callable[[Any], Any], tasks: Sequence[Any]) -> list[Any]:
    return [function(t) for t in tasks]


def in_plane_dispersion(structure: Structure, model: str = "eight-band",
                        k_max_invA: float = 0.05, n_k: int = 21, n_levels: int = 3,
                        spacing_nm: float = 0.1,
                        map_points: Callable[[Callable, list], list] | None = None
                        ) -> InPlaneDispersion:
    """The subbands along two in-plane directions up to ``k_max_invA`` (module docstring).

    Parameters
    ----------
    structure : Structure
    model : str
        A multiband model (:data:`~.multiband.MULTIBAND_MODELS`).
    k_max_invA : float
        Largest |k∥|, Å⁻¹ (0 < k ≤ 0.5).
    n_k : int
        Points along each direction, k = 0 included (2 to 500).
    n_levels : int
        Subbands on each side of the gap.
    spacing_nm : float
        Grid spacing.
    map_points : callable, optional
        ``map_points(point_levels, tasks)`` returning the values in the order of ``tasks``
        (default: one after the other in this process).
    """
    if not (0 < k_max_invA <= 0.5) or not 2 <= n_k <= 500:
        raise InputError("expected 0 < k_max_invA ≤ 0.5 Å⁻¹ and 2 ≤ n_k ≤ 500",
                         key="k_max_invA")
    setup = dispersion_setup(structure, model, n_levels, spacing_nm)
    k = np.linspace(0.0, k_max_invA, n_k)
    ks = np.concatenate([k, [MASS_STEP_INVA]])
    directions = IN_PLANE_DIRECTIONS[structure.growth]
    tasks = [(setup, t * np.array(u)) for _, u in directions for t in ks]
    values = (map_points or _serial)(point_levels, tasks)
    cond, val, masses = {}, {}, {}
    for j, (label, _) in enumerate(directions):
        rows = values[j * ks.size:(j + 1) * ks.size]
        c = np.array([r[0] for r in rows]).reshape(ks.size, -1)
        v = np.array([r[1] for r in rows])
        cond[label], val[label] = c[:-1], v[:-1]
        masses[label] = {"conduction": C * MASS_STEP_INVA**2 / (c[-1] - c[0]),
                         "valence": C * MASS_STEP_INVA**2 / (v[-1] - v[0])}
    return InPlaneDispersion(model, structure.name, structure.growth, k, cond, val, masses)
