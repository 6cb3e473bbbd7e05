"""The in-plane dispersion of a heterostructure on an engine (serial, local Dask, a scheduler).

Every k∥ point of :func:`bandpert.heterostructure.in_plane_dispersion` is an independent
shift-invert solve of the multiband operator (0.05–0.4 s on the 20 nm benchmark well), so the
points are handed to :func:`bandpert.runs.execution.run` as work items, grouped into blocks of
consecutive points, several blocks per worker; each item carries the small
:class:`~bandpert.heterostructure.dispersion.DispersionSetup` (grid and layer matrices), so
nothing is rebuilt on the workers but the operator of the point itself. Results come back in
order, identical to the serial ones (one BLAS thread per solve either way).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

from ..errors import InputError
from ..heterostructure import InPlaneDispersion, in_plane_dispersion
from ..input.structure_file import Structure
from .execution import SERIAL, Engine, Progress, Runner, run

__all__ = ["in_plane_on_engine"]


def in_plane_on_engine(structure: Structure, model: str = "eight-band",
                       k_max_invA: float = 0.05, n_k: int = 21, n_levels: int = 3,
                       spacing_nm: float = 0.1, engine: Engine | Runner = SERIAL,
                       progress: Progress | None = None) -> InPlaneDispersion:
    """:func:`~bandpert.heterostructure.in_plane_dispersion` with its k∥ points on ``engine``.

    Raises
    ------
    InputError
        Bad arguments (before any work), or a point whose levels cannot be found.
    RuntimeError
        A point that failed for any other reason (a dispersion with a missing point would be
        wrong, so no partial result is returned).
    """

    def map_points(function: Callable[[Any], Any], tasks: Sequence[Any]) -> list[Any]:
        if isinstance(engine, Engine) and engine.kind == "serial":
            values = []  # here, errors keep their key and file
            for i, task in enumerate(tasks):
                values.append(function(task))
                if progress:
                    progress(i + 1, len(tasks))
            return values
        outcomes = run(function, tasks, engine, progress=progress)
        for i, outcome in enumerate(outcomes):
            if not outcome.ok:
                if outcome.user_error:
                    raise InputError(outcome.error)
                raise RuntimeError(f"in-plane point {i} (k∥ = {tasks[i][1]} 1/Å) failed: "
                                   f"{outcome.error}")
        return [o.value for o in outcomes]

    return in_plane_dispersion(structure, model, k_max_invA, n_k, n_levels, spacing_nm,
                               map_points)
