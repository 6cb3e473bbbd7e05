"""Model-independent perturbation theory for ``H(λ) = H0 + λ V`` with diagonal ``H0``.

Arrays only: nothing here knows about crystals. ``H0 = diag(e0)`` (real energies), ``V``
Hermitian, ``λ = 1`` the physical case, orders counted in ``λ``; energies come back in the unit
of ``e0`` and ``V``.

Modules
-------
rs
    Rayleigh–Schrödinger series of one level (any order) and batched over many spectra.
grouping
    Grouping of degenerate or strongly coupled levels.
lowdin
    Quasi-degenerate (Löwdin) effective Hamiltonians, closed forms and any order.
driver
    The batched driver :func:`perturbative_levels` with its error estimate.
radius
    Convergence radius of a perturbation series.
"""

from .common import DEFAULT_DEGENERACY_TOL
from .driver import (
    DEFAULT_MAX_SUBSPACE,
    TREATMENT_NAMES,
    TREATMENT_NONDEGENERATE,
    TREATMENT_SUBSPACE,
    PerturbedLevels,
    perturbative_levels,
    threshold_ladder,
)
from .grouping import DEFAULT_COUPLING_THRESHOLD, group_levels
from .lowdin import effective_hamiltonian_series, lowdin_effective_hamiltonian, subspace_levels
from .radius import convergence_radius, level_convergence_radius
from .rs import (
    RSSeries,
    energy_corrections,
    rs_energy_series,
    rs_series,
    rs_state_series,
    second_order_shifts,
)

__all__ = [
    "DEFAULT_COUPLING_THRESHOLD",
    "DEFAULT_DEGENERACY_TOL",
    "DEFAULT_MAX_SUBSPACE",
    "TREATMENT_NAMES",
    "TREATMENT_NONDEGENERATE",
    "TREATMENT_SUBSPACE",
    "PerturbedLevels",
    "RSSeries",
    "convergence_radius",
    "effective_hamiltonian_series",
    "energy_corrections",
    "group_levels",
    "level_convergence_radius",
    "lowdin_effective_hamiltonian",
    "perturbative_levels",
    "rs_energy_series",
    "rs_series",
    "rs_state_series",
    "second_order_shifts",
    "subspace_levels",
    "threshold_ladder",
]
