"""Band extrema: refined band edges, valleys of a strained crystal, the nearest true extremum.

The band edges of a semiconductor are found on the path and refined in the full k-space by
BFGS on E_n(k) with the Hellmann–Feynman gradient ∂E_n/∂k_i = 2C π^i_nn, C = ħ²/2m0 (Feynman,
Phys. Rev. 56, 340 (1939)). From a saddle or a crossing (:mod:`bandpert.physics.critical_points`)
the same search, started from small steps off the point, finds the nearest true extremum (e.g.
the camel's-back minimum of the GaAs conduction band near X).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.constants as const
import scipy.linalg
import scipy.optimize

from ..crystal.lattice import describe_position
from ..planewave.model import PlaneWaveModel
from ..planewave.solver import exact_energies
from ..units import BOLTZMANN_EV_PER_K
from ..units import HBAR2_OVER_2M0_EV_A2 as C

#: A refined extremum must lie this much (eV) beyond the starting point to replace it.
EXTREMUM_GAIN_EV = 1e-6


def levels(model: PlaneWaveModel, k: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Lowest n eigenvalues and eigenvectors of H(k)."""
    n = min(n, model.size)
    return scipy.linalg.eigh(model.hamiltonian(k), subset_by_index=(0, n - 1), driver="evr",
                             check_finite=False)


def splittings(e: np.ndarray, band: int) -> np.ndarray:
    """Distance from level ``band`` to the next below and above (inf at the ends)."""
    below = e[band] - e[band - 1] if band > 0 else np.inf
    above = e[band + 1] - e[band] if band + 1 < e.size else np.inf
    return np.array([below, above])


def momentum(model: PlaneWaveModel, k: np.ndarray, vectors: np.ndarray) -> np.ndarray:
    """π^i_nm = β Σ_G c_n*(G) c_m(G) (k + G)_i (Å⁻¹) between the given eigenvectors, so that
    ⟨n|∂H/∂k_i|m⟩ = 2C π^i_nm (β the model's kinetic factor)."""
    kg = k[None, :] + model.basis.g_cart_invA
    return model.kinetic_factor * np.einsum("gn,gi,gm->inm", vectors.conj(), kg, vectors,
                                            optimize=True)


@dataclass(frozen=True)
class NearestExtremum:
    """The extremum of the same band found from a saddle or a crossing.

    Attributes
    ----------
    kind : str
        "minimum" or "maximum".
    k_cart_invA, k_frac : numpy.ndarray
    energy_eV : float
        Absolute energy there.
    below_eV : float
        How much lower (minimum) or higher (maximum) than the point, eV (≥ 0).
    distance_invA : float
        |k_extremum − k_point| (Å⁻¹).
    along_fraction : float or None
        |t| where the extremum, brought into the first zone, is t·k_point (within 1 % of the
        length), e.g. 0.92 of Γ→X (t < 0: on the line to the equivalent −k); else None.
    """

    kind: str
    k_cart_invA: np.ndarray
    k_frac: np.ndarray
    energy_eV: float
    below_eV: float
    distance_invA: float
    along_fraction: float | None



def refine_extremum(model: PlaneWaveModel, k_start_cart_invA: np.ndarray, band: int,
                    maximum: bool, max_steps: int | None = None) -> tuple[np.ndarray, float]:
    """Locate a band minimum (or maximum) in the full k-space near a starting point.

    BFGS on E_n(k) with the Hellmann–Feynman gradient ∂E_n/∂k_i = 2C π^i_nn (Feynman,
    Phys. Rev. 56, 340 (1939)).

    Returns
    -------
    k_cart_invA : numpy.ndarray
        The extremum.
    energy_eV : float
    """
    sign = -1.0 if maximum else 1.0

    def f(k: np.ndarray) -> tuple[float, np.ndarray]:
        w, c = levels(model, k, band + 1)
        grad = 2.0 * C * np.real(momentum(model, k, c[:, band:band + 1])[:, 0, 0])
        return sign * w[band], sign * grad

    res = scipy.optimize.minimize(f, np.asarray(k_start_cart_invA, dtype=float), jac=True,
                                  method="BFGS", options={"gtol": 1e-7, "maxiter": max_steps})
    return res.x, float(sign * res.fun)


def nearest_extremum(model: PlaneWaveModel, k_cart_invA: np.ndarray, band: int,
                     minimum: bool, step_fraction: float = 0.02,
                     directions: np.ndarray | None = None) -> NearestExtremum | None:
    """The extremum of ``band`` reached from small steps off k along ± given directions (BFGS;
    default: the Cartesian axes).

    The step is ``step_fraction`` of the shortest reciprocal vector; among the extrema reached,
    the one closest to k that improves on the point by more than :data:`EXTREMUM_GAIN_EV` wins.
    """
    k = np.asarray(k_cart_invA, dtype=float)
    d = k.size
    e0 = float(levels(model, k, band + 1)[0][band])
    h = step_fraction * np.min(np.linalg.norm(model.reciprocal_invA, axis=1))
    found: list[tuple[float, np.ndarray, float]] = []
    for axis in np.eye(d) if directions is None else np.atleast_2d(directions):
        for s in (1.0, -1.0):
            kk, ee = refine_extremum(model, k + s * h * axis, band, maximum=not minimum,
                                     max_steps=60)
            gain = (e0 - ee) if minimum else (ee - e0)
            if gain > EXTREMUM_GAIN_EV:
                found.append((float(np.linalg.norm(kk - k)), kk, ee))
    if not found:
        return None
    dist, kk, ee = min(found, key=lambda x: (round(x[0], 4), x[2] if minimum else -x[2]))
    kk = _first_zone(kk, model.reciprocal_invA)
    along = None
    if np.linalg.norm(k) > 0:
        t = float(kk @ k / (k @ k))
        if np.linalg.norm(kk - t * k) <= 0.01 * np.linalg.norm(k):
            along = abs(t)  # −t·k is the same point seen from the equivalent −k
    return NearestExtremum(kind="minimum" if minimum else "maximum", k_cart_invA=kk,
                           k_frac=np.linalg.solve(model.reciprocal_invA.T, kk), energy_eV=ee,
                           below_eV=abs(e0 - ee), distance_invA=dist, along_fraction=along)


def _first_zone(k: np.ndarray, reciprocal_invA: np.ndarray) -> np.ndarray:
    """The image k − G closest to Γ among the reciprocal vectors with Miller indices in {−2..2}."""
    d = k.size
    grid = np.stack(np.meshgrid(*[np.arange(-2, 3)] * d, indexing="ij"), -1).reshape(-1, d)
    images = k - grid @ reciprocal_invA
    return images[np.argmin(np.einsum("ij,ij->i", images, images))]


def edge_point(model: PlaneWaveModel, k_path_cart_invA: np.ndarray, path_index: int, band: int,
               maximum: bool) -> np.ndarray:
    """Start from the extremum found along the path and refine it in the full k-space.

    A degenerate point (e.g. the valence top at Γ) is a cusp of the individual bands and is
    kept as it is; a refinement that wanders off by more than a tenth of the smallest
    reciprocal vector is refused and the path point kept.
    """
    k = np.asarray(k_path_cart_invA[path_index], dtype=float)
    w, c = levels(model, k, band + 3)
    if min(splittings(w, band)) <= 1e-5:  # a cusp of the run's bands: keep the point
        return k
    gradient = 2.0 * C * np.real(momentum(model, k, c[:, band:band + 1])[:, 0, 0])
    if np.linalg.norm(gradient) < 1e-9:  # already stationary
        return k
    refined, energy = refine_extremum(model, k, band, maximum)
    limit = 0.1 * np.min(np.linalg.norm(model.reciprocal_invA, axis=1))
    gain = (energy - w[band]) * (1.0 if maximum else -1.0)
    # The fixed-G basis breaks the equivalence of k and −k + G slightly, so a zone-boundary
    # extremum such as L shows a spurious gradient (~1e-4 eV·Å in germanium); a move that
    # gains less than 1 µeV (far below the 5 meV basis convergence) is not a real extremum.
    if np.linalg.norm(refined - k) > limit or gain < EXTREMUM_GAIN_EV:
        return k
    return refined


@dataclass(frozen=True)
class EdgeLocation:
    """Where a band edge of a semiconductor sits, found on the path and refined in 3D.

    Attributes
    ----------
    name : str
        "conduction minimum" or "valence maximum".
    band : int
        0-based band.
    maximum : bool
    k_cart_invA, k_frac : numpy.ndarray
        The refined point.
    energy_eV : float
        Absolute energy there.
    where : str
        In words, e.g. "0.85 of Γ→X (refined)" or "image of … under the reference symmetry".
    """

    name: str
    band: int
    maximum: bool
    k_cart_invA: np.ndarray
    k_frac: np.ndarray
    energy_eV: float
    where: str


def valley_images(bs, index: int, band: int, maximum: bool,
                  rotations: np.ndarray | None) -> tuple[np.ndarray, int]:
    """The path extremum and its images under a reference point group (and −k).

    A strained cell has lower symmetry, so valleys that were equivalent split and the lowest one
    may not lie on the path. Returns the Cartesian candidates (the path point first) and the
    index of the best one; an image wins only if it is better by more than 1e-9 eV, so an
    unstrained crystal keeps the point on the path.
    """
    k0 = bs.path.k_frac[index]
    if rotations is None:
        return bs.path.k_cart_invA[index:index + 1], 0
    images = np.array([k0 @ np.linalg.inv(r) for r in rotations])
    images = np.concatenate([images, -images])
    images = images[np.unique(np.round(images, 9), axis=0, return_index=True)[1]]
    others = images[~np.all(np.isclose(images, k0, atol=1e-9), axis=1)]
    images = np.concatenate([[k0], others])
    cart = images @ bs.model.reciprocal_invA
    e = exact_energies(bs.model, cart, band + 1)[:, band]
    gain = (e - e[0]) if maximum else (e[0] - e)
    best = int(np.argmax(gain))
    return cart, (best if gain[best] > 1e-9 else 0)


def locate_edges(bs, reference_rotations: np.ndarray | None = None) -> list[EdgeLocation]:
    """The conduction minimum and valence maximum of a semiconductor's band structure.

    The extrema found along the path (compared first with their images under
    ``reference_rotations``, for a strained crystal) are refined in the full k-space
    (:func:`edge_point`).

    Parameters
    ----------
    bs : bandpert.physics.bands.BandStructure
        Exact bands with ``bs.edges`` not None.
    reference_rotations : numpy.ndarray, optional
        Point group of the unstrained crystal.

    Returns
    -------
    list of EdgeLocation
        Conduction minimum first, then valence maximum.
    """
    n_val = bs.material.valence_electrons // bs.material.electrons_per_band  # spinor: 1 per band
    out = []
    for name, index, band, maximum in (
            ("conduction minimum", bs.edges.conduction_min_index, n_val, False),
            ("valence maximum", bs.edges.valence_max_index, n_val - 1, True)):
        candidates, best = valley_images(bs, index, band, maximum, reference_rotations)
        k = edge_point(bs.model, candidates, best, band, maximum)
        energy = float(levels(bs.model, k, band + 1)[0][band])
        moved = not np.allclose(k, candidates[best], atol=1e-9)
        where = describe_position(bs.path, index)
        if best:
            where = f"image of {where} under the reference symmetry"
        out.append(EdgeLocation(name=name, band=band, maximum=maximum, k_cart_invA=k,
                                k_frac=np.linalg.solve(bs.model.reciprocal_invA.T, k),
                                energy_eV=energy, where=where + (" (refined)" if moved else "")))
    return out


def star_size(k_frac: np.ndarray, rotations: np.ndarray, tol: float = 1e-4) -> int:
    """Number of symmetry-distinct copies of k (modulo reciprocal-lattice vectors).

    k transforms as k' = k R^{-1} in fractional reciprocal coordinates for direct-lattice
    rotations R (spglib convention, x' = R x); time reversal adds −k. Copies equal up to a
    reciprocal-lattice vector count once, so the four pairs L, −L give four L valleys in fcc
    (common practice, no source).
    """
    k = np.asarray(k_frac, dtype=float)
    images = np.array([k @ np.linalg.inv(r) for r in rotations])
    images = np.concatenate([images, -images])
    reduced = images - np.round(images)
    distinct: list[np.ndarray] = []
    for p in reduced:
        if not any(np.allclose(_wrap(p - q), 0.0, atol=tol) for q in distinct):
            distinct.append(p)
    return len(distinct)


def _wrap(x: np.ndarray) -> np.ndarray:
    return x - np.round(x)


def density_of_states_mass(principal_masses: np.ndarray, valleys: int) -> float:
    """m_dos = g^{2/3} (m1 m2 m3)^{1/3} for g equivalent ellipsoidal valleys (Sze, *Physics of
    Semiconductor Devices*, 2nd ed. 1981, §1.4)."""
    return float(valleys ** (2 / 3) * np.prod(principal_masses) ** (1 / len(principal_masses)))


def conductivity_mass(principal_masses: np.ndarray) -> float:
    """m_c = 3/(1/m1 + 1/m2 + 1/m3) for valleys spread over the cubic directions (Sze 1981)."""
    return float(len(principal_masses) / np.sum(1.0 / np.asarray(principal_masses)))


def effective_density_of_states_cm3(mass_dos: float, temperature_K: float) -> float:
    """N = 2 (m_dos m0 k_B T / 2πħ²)^{3/2} in cm⁻³ (Sze 1981, eq. 1.16).

    Parameters
    ----------
    mass_dos : float
        Density-of-states mass in m0.
    temperature_K : float
    """
    kt_j = BOLTZMANN_EV_PER_K * temperature_K * const.e
    n_m3 = 2.0 * (mass_dos * const.m_e * kt_j / (2 * np.pi * const.hbar**2)) ** 1.5
    return float(n_m3 * 1e-6)
