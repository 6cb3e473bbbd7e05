"""The one cutoff rule of a plane-wave model: which kinetic-energy cutoff a run uses.

A cutoff given by the caller wins, then the file's ``basis.cutoff_eV``; without either, the
smallest converged cutoff is searched (:func:`converged_cutoff`). A given cutoff is checked for
convergence and warned about (:func:`warn_if_unconverged`) unless the caller switches it off.
Every command (bands, gaps, masses, dos, sweep, check) goes through :func:`choose_cutoff`.
"""

from __future__ import annotations

import warnings

import numpy as np

from ..crystal.lattice import reciprocal_vectors, standard_path
from ..errors import InputError, ModelWarning
from ..input.material import Material
from ..units import HBAR2_OVER_2M0_EV_A2
from .model import build_model
from .solver import exact_energies

#: Bands move by less than this when the default cutoff is raised by half (eV).
CONVERGENCE_TOLERANCE_EV = 0.005


def check_cutoff(cutoff_eV: float | None) -> None:
    """Refuse a cutoff that is given but not a positive finite number (key ``cutoff_eV``)."""
    if cutoff_eV is not None and not (np.isfinite(cutoff_eV) and cutoff_eV > 0):
        raise InputError(f"must be a positive number of eV, got {cutoff_eV}", key="cutoff_eV")


def choose_cutoff(material: Material, n_bands: int, cutoff_eV: float | None = None,
                  check_convergence: bool = True) -> float:
    """The cutoff a run uses: the one given, else the file's, else :func:`converged_cutoff`.

    Parameters
    ----------
    material : Material
    n_bands : int
        The bands that must be converged.
    cutoff_eV : float, optional
        A cutoff given by the caller; must be positive.
    check_convergence : bool
        Warn (:func:`warn_if_unconverged`) when a given or file cutoff is not converged.

    Returns
    -------
    float
        The cutoff in eV.
    """
    check_cutoff(cutoff_eV)
    cutoff = cutoff_eV or material.cutoff_eV
    if cutoff is None:
        return converged_cutoff(material, n_bands)
    if check_convergence:
        warn_if_unconverged(material, cutoff, n_bands)
    return float(cutoff)


def _probe_points(material: Material) -> np.ndarray:
    """Labelled points and segment midpoints, Cartesian (Å⁻¹): where convergence is checked."""
    points, legs = standard_path(material)
    b = reciprocal_vectors(material.vectors_A)
    frac = [points[label] for leg in legs for label in leg]
    frac += [np.add(points[leg[i]], points[leg[i + 1]]) / 2 for leg in legs
             for i in range(len(leg) - 1)]
    return np.unique(np.round(np.array(frac, dtype=float), 12), axis=0) @ b


def converged_cutoff(material: Material, n_bands: int,
                     tolerance_eV: float = CONVERGENCE_TOLERANCE_EV) -> float:
    """Smallest cutoff (on a ×1.15 ladder) at which the bands move by < tolerance at ×1.5 cutoff.

    Ladder steps where the ×1.5 basis holds no more plane waves than the lower one are skipped.

    The check runs at the labelled points and segment midpoints of the path with 20 % margin
    (tolerance × 0.8), on absolute energies (stricter than after a shift of the zero).

    Parameters
    ----------
    material : Material
    n_bands : int
        The bands that must be converged.
    tolerance_eV : float
        Allowed change of any band at any probe point.

    Returns
    -------
    float
        The cutoff in eV.
    """
    k = _probe_points(material)
    b = reciprocal_vectors(material.vectors_A)
    # start where the basis holds twice the bands: the smallest |G| that does
    g_min = np.min(np.linalg.norm(b, axis=1))
    cutoff = HBAR2_OVER_2M0_EV_A2 * g_min**2 * max(1.0, (2 * n_bands) ** (2 / material.dimension)
                                                   / 4)
    for _ in range(60):
        low = build_model(material, cutoff)
        high = build_model(material, 1.5 * cutoff)
        # raising the cutoff by half must add plane waves, or the test would pass vacuously
        if high.size > low.size and low.size >= n_bands:
            diff = np.abs(exact_energies(low, k, n_bands) - exact_energies(high, k, n_bands))
            if diff.max() < 0.8 * tolerance_eV:
                return float(cutoff)
        cutoff *= 1.15
    raise InputError("no cutoff converged the bands within the basis limit; expected a "
                     "smoother potential or an explicit basis.cutoff_eV", material.file, "basis")


def warn_if_unconverged(material: Material, cutoff_eV: float, n_bands: int,
                        tolerance_eV: float = CONVERGENCE_TOLERANCE_EV) -> float:
    """Warn (:class:`~bandpert.errors.ModelWarning`) when a given cutoff is not converged.

    The bands at the labelled points and segment midpoints are compared with those at 1.5 ×
    the cutoff (or the next cutoff that adds plane waves, if that one adds none); the largest
    change (eV) is returned.
    """
    low = build_model(material, cutoff_eV)
    factor = 1.5
    high = build_model(material, factor * cutoff_eV)
    while high.size == low.size and factor < 10:  # a raise that adds nothing proves nothing
        factor *= 1.15
        high = build_model(material, factor * cutoff_eV)
    nb = min(n_bands, low.size)
    k = _probe_points(material)
    change = float(np.abs(exact_energies(low, k, nb) - exact_energies(high, k, nb)).max())
    if change >= tolerance_eV:
        warnings.warn(f"the bands move by {1e3 * change:.1f} meV when the cutoff of "
                      f"{cutoff_eV:.4g} eV is raised {factor:.2f}-fold: the basis is not "
                      "converged to "
                      f"{1e3 * tolerance_eV:g} meV (raise the cutoff, or leave it out for a "
                      "converged default)", ModelWarning, stacklevel=3)
    return change
