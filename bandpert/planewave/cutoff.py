"""The one cutoff rule of a plane-wave model: which kinetic-energy cutoff a run uses.

A cutoff given by the caller wins, then the file's ``basis.cutoff_eV``; without either, the
smallest converged cutoff is searched (:func:`converged_cutoff`).

The search has a budget: at most :data:`SEARCH_MAX_BASIS` plane waves and
:data:`SEARCH_SECONDS` seconds, and it refuses up front a potential so strong against the
kinetic energy of the first reciprocal-lattice shell (:data:`SEARCH_MAX_STRENGTH`) that no basis
within the budget could converge it. When the budget runs out the search stops with one line
(:class:`~bandpert.errors.InputError`, exit status 2 on the command line) naming what ran out:
it never proceeds silently with an unconverged basis. A given cutoff is checked for
convergence and warned about (:func:`warn_if_unconverged`) unless the caller switches it off.
Every command (bands, gaps, masses, dos, sweep, check) goes through :func:`choose_cutoff`.
"""

from __future__ import annotations

import time
import warnings

import numpy as np

from ..crystal.lattice import reciprocal_vectors, standard_path
from ..errors import InputError, ModelWarning
from ..input.material import Material
from ..units import HBAR2_OVER_2M0_EV_A2
from .basis import plane_wave_basis
from .model import build_model
from .potential import fourier_coefficients
from .solver import exact_energies

#: Bands move by less than this when the default cutoff is raised by half (eV).
CONVERGENCE_TOLERANCE_EV = 0.005


#: Plane waves the converged-cutoff search may use (in its upper, ×1.5 basis).
SEARCH_MAX_BASIS = 1000

#: Wall-clock seconds the converged-cutoff search may take.
SEARCH_SECONDS = 20.0

#: Largest ratio max |V(G)| / (ħ²|G1|²/2m0), G1 the shortest non-zero G, for which the search
#: is tried. The bundled materials lie at 0.03–0.17; a crystal at 10 is far outside the
#: nearly-free-electron regime a plane-wave search can converge within its budget.
SEARCH_MAX_STRENGTH = 10.0


def potential_strength(material: Material) -> tuple[float, float]:
    """Largest |V(G)| (eV) and ħ²|G1|²/2m0 (eV) of the shortest non-zero G1, before any search.

    |V(G)| is taken over the G up to five times |G1|² (every tabulated shell of the bundled
    materials lies below that).
    """
    b = reciprocal_vectors(material.vectors_A)
    g1 = float(np.min(np.linalg.norm(b, axis=1)))
    e1 = HBAR2_OVER_2M0_EV_A2 * g1**2
    miller = plane_wave_basis(b, 5.0 * e1 * (1 + 1e-9)).miller
    v = float(np.max(np.abs(fourier_coefficients(material, miller)), initial=0.0))
    return v, e1


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
    start = time.monotonic()
    v_max, e1 = potential_strength(material)
    if not v_max <= SEARCH_MAX_STRENGTH * e1:
        raise InputError(f"the potential (largest |V(G)| = {v_max:.3g} eV) is {v_max / e1:.3g} "
                         f"times the kinetic energy of the first reciprocal-lattice shell "
                         f"({e1:.3g} eV): no plane-wave cutoff within the search's budget "
                         f"converges it; expected a ratio below {SEARCH_MAX_STRENGTH:g} or an "
                         "explicit basis.cutoff_eV", material.file, "potential")
    k = _probe_points(material)
    b = reciprocal_vectors(material.vectors_A)
    # start where the basis holds twice the bands: the smallest |G| that does
    g_min = np.min(np.linalg.norm(b, axis=1))
    cutoff = HBAR2_OVER_2M0_EV_A2 * g_min**2 * max(1.0, (2 * n_bands) ** (2 / material.dimension)
                                                   / 4)
    # the Γ-centred bases are nested, so a basis is known by its size: each (basis, probe point)
    # is diagonalised at most once, and a step is first tried at the point that failed last
    seen: dict[int, np.ndarray] = {}

    def energies(c: float, points: np.ndarray) -> tuple[int, np.ndarray | None]:
        size = plane_wave_basis(b, c).size
        if size < n_bands:
            return size, None
        table = seen.setdefault(size, np.full((len(k), n_bands), np.nan))
        todo = points[np.isnan(table[points, 0])]
        if todo.size:
            table[todo] = exact_energies(build_model(material, c), k[todo], n_bands)
        return size, table[points]

    everywhere = np.arange(len(k))
    worst = everywhere[:1]
    for _ in range(60):
        high_size = plane_wave_basis(b, 1.5 * cutoff).size
        elapsed = time.monotonic() - start
        if high_size > SEARCH_MAX_BASIS or elapsed > SEARCH_SECONDS:
            spent = (f"{high_size} plane waves at {1.5 * cutoff:.4g} eV" if
                     high_size > SEARCH_MAX_BASIS else f"{elapsed:.0f} s")
            budget = (f"{SEARCH_MAX_BASIS} plane waves" if high_size > SEARCH_MAX_BASIS else
                      f"{SEARCH_SECONDS:g} s")
            raise InputError(f"no cutoff converged the bands to {1e3 * tolerance_eV:g} meV within "
                             f"the search's budget of {budget} (reached {spent}); expected a "
                             "smoother potential or an explicit basis.cutoff_eV",
                             material.file, "basis.cutoff_eV")
        n_low, _ = energies(cutoff, worst[:0])
        # raising the cutoff by half must add plane waves, or the test would pass vacuously
        if high_size > n_low and n_low >= n_bands:
            for points in (worst, everywhere):
                diff = np.abs(energies(cutoff, points)[1] - energies(1.5 * cutoff, points)[1])
                if diff.max() >= 0.8 * tolerance_eV:
                    worst = points[[int(np.argmax(diff.max(axis=1)))]]
                    break
            else:
                return float(cutoff)
        cutoff *= 1.15
    raise InputError("no cutoff converged the bands within 60 steps of the search; expected a "
                     "smoother potential or an explicit basis.cutoff_eV", material.file,
                     "basis.cutoff_eV")


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
