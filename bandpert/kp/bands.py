"""Bands of k·p models: along straight lines through Γ, and along a short path L–Γ–X | Γ–K.

Energies are eV from the valence-band top at Γ (:data:`~bandpert.kp.hamiltonians.ENERGY_ZERO`),
k in Å⁻¹ and, where the model knows its lattice constant, in units of 2π/a.

The path (:func:`bands_along_path`) runs from a fraction f of the way to L, through Γ, to f of
the way to X, then from Γ to f of the way to K, with the fcc zone points of the cubic cell
L = (½, ½, ½), X = (1, 0, 0), K = (¾, ¾, 0) in units of 2π/a (Bouckaert, Smoluchowski & Wigner,
Phys. Rev. 50, 58 (1936)). The models are expansions about Γ, so f stays small (default 0.1:
|k| ≤ 0.106·2π/a, about 0.12 Å⁻¹ for GaAs); the whole zone is the plane-wave models' job.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .hamiltonians import ENERGY_ZERO, KPModel
from .parameters import unit_vector

__all__ = [
    "BAND_SHORT_NAMES",
    "DEFAULT_PATH_FRACTION",
    "PATH_POINTS_2PI_A",
    "DirectionalBands",
    "PathBands",
    "bands_along",
    "bands_along_path",
]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class DirectionalBands:
    """Bands of a k·p model along a straight line through Γ.

    Attributes
    ----------
    model : str
    direction : ndarray, shape (3,)
        Unit vector.
    k_invA : ndarray, shape (n_k,)
        Signed distance from Γ along ``direction``, Å⁻¹.
    k_cart_invA : ndarray, shape (n_k, 3)
    k_frac : ndarray or None, shape (n_k,)
        k in units of 2π/a (None without a lattice constant).
    energies_eV : ndarray, shape (n_k, n)
        Sorted bands, eV from the valence-band top (:data:`ENERGY_ZERO`).
    band_names : tuple of str
        Names of the sorted bands near Γ.
    """

    model: str
    direction: FloatArray
    k_invA: FloatArray
    k_cart_invA: FloatArray
    k_frac: FloatArray | None
    energies_eV: FloatArray
    band_names: tuple[str, ...]
    energy_zero: str = ENERGY_ZERO


def _two_pi_over_a(model: KPModel) -> float:
    if model.lattice_constant_A is None:
        raise ValueError("k as a fraction of 2π/a needs the model's lattice_constant_A")
    return 2.0 * math.pi / model.lattice_constant_A


def bands_along(model: KPModel, direction: ArrayLike | str, *, k_max_invA: float | None = None,
                k_max_frac: float | None = None, n_k: int = 101,
                both_sides: bool = False) -> DirectionalBands:
    """Bands from Γ along ``direction`` (or through Γ with ``both_sides``).

    Parameters
    ----------
    model : KPModel
    direction : array_like or str
        See :func:`unit_vector`.
    k_max_invA, k_max_frac : float
        Extent of the line, in Å⁻¹ or in units of 2π/a (give exactly one; the fraction needs
        the model's lattice constant).
    n_k : int
        Number of k-points (≥ 2).
    both_sides : bool
        Sample −k_max … k_max instead of 0 … k_max.

    Returns
    -------
    DirectionalBands
    """
    u = unit_vector(direction)
    if (k_max_invA is None) == (k_max_frac is None):
        raise ValueError("give exactly one of k_max_invA and k_max_frac")
    k_max = k_max_invA if k_max_invA is not None else k_max_frac * _two_pi_over_a(model)
    if not (math.isfinite(k_max) and k_max > 0):
        raise ValueError(f"the extent of the line must be positive, got {k_max}")
    if n_k < 2:
        raise ValueError(f"n_k must be at least 2, got {n_k}")
    t = np.linspace(-k_max if both_sides else 0.0, k_max, n_k)
    k_cart = t[:, None] * u
    frac = None if model.lattice_constant_A is None else t / _two_pi_over_a(model)
    return DirectionalBands(model.name, u, t, k_cart, frac, model.energies_eV(k_cart),
                            model.band_names)



#: The zone points the path heads for, Cartesian in units of 2π/a (module docstring).
PATH_POINTS_2PI_A: dict[str, tuple[float, float, float]] = {
    "L": (0.5, 0.5, 0.5), "X": (1.0, 0.0, 0.0), "K": (0.75, 0.75, 0.0)}

#: Default fraction of the way from Γ to each point (module docstring).
DEFAULT_PATH_FRACTION: float = 0.1

#: Short names of the bands, as drawn on the curves.
BAND_SHORT_NAMES: dict[str, str] = {"conduction": "CB", "heavy hole": "HH", "light hole": "LH",
                                    "split-off": "SO"}


@dataclass(frozen=True, eq=False)
class PathBands:
    """Bands of one or more k·p models along L–Γ–X | Γ–K near Γ (:func:`bands_along_path`).

    Attributes
    ----------
    models : tuple of str
    energies_eV : dict
        Model name → (n_k, n) sorted bands, eV from the valence-band top at Γ.
    band_names : dict
        Model name → names of the sorted bands near Γ (:attr:`KPModel.band_names`).
    k_cart_invA : ndarray, shape (n_k, 3)
    k_2pi_a : ndarray, shape (n_k, 3)
        The same k in units of 2π/a.
    distance_2pi_a : ndarray, shape (n_k,)
        Distance along the path in units of 2π/a (not increased across the jump X | Γ).
    label_indices : ndarray of int
        Points of the path that carry a label.
    labels : tuple of str
        Their labels: "0.1 L", "Γ", "0.1 X|Γ", "0.1 K" for a fraction 0.1.
    leg_starts : ndarray of int
        First point of each continuous leg (two legs: L–Γ–X and Γ–K).
    fraction : float
        How far towards L, X and K the path goes.
    k_max_invA : float
        The largest |k| on the path (towards K).
    energy_zero : str
    """

    models: tuple[str, ...]
    energies_eV: dict[str, FloatArray]
    band_names: dict[str, tuple[str, ...]]
    k_cart_invA: FloatArray
    k_2pi_a: FloatArray
    distance_2pi_a: FloatArray
    label_indices: NDArray[np.int_]
    labels: tuple[str, ...]
    leg_starts: NDArray[np.int_]
    fraction: float
    k_max_invA: float
    energy_zero: str = ENERGY_ZERO


def bands_along_path(models: list[KPModel] | tuple[KPModel, ...], lattice_constant_A: float,
                     fraction: float = DEFAULT_PATH_FRACTION,
                     n_per_leg: int = 41) -> PathBands:
    """Bands of k·p models from f·L through Γ to f·X, and from Γ to f·K.

    Parameters
    ----------
    models : sequence of KPModel
        Models of one crystal (their names must differ).
    lattice_constant_A : float
        The cubic lattice constant a.
    fraction : float
        f, how far towards each zone point, 0 < f ≤ 0.5 (the models are expansions about Γ).
    n_per_leg : int
        Points on each of the three lines from Γ (≥ 2).

    Returns
    -------
    PathBands
    """
    if not 0.0 < fraction <= 0.5:
        raise ValueError(f"fraction must be in (0, 0.5], got {fraction}")
    if not (math.isfinite(lattice_constant_A) and lattice_constant_A > 0):
        raise ValueError(f"lattice_constant_A must be positive, got {lattice_constant_A}")
    if n_per_leg < 2:
        raise ValueError(f"n_per_leg must be at least 2, got {n_per_leg}")
    t = np.linspace(0.0, fraction, n_per_leg)[:, None]
    ends = {name: np.array(p) for name, p in PATH_POINTS_2PI_A.items()}
    k = np.vstack([t[::-1] * ends["L"], t[1:] * ends["X"], t * ends["K"]])
    step = np.linalg.norm(np.diff(k, axis=0), axis=1)
    second = 2 * n_per_leg - 1  # first point of the Γ–K leg
    step[second - 1] = 0.0  # the jump X | Γ takes no room on the axis
    distance = np.concatenate([[0.0], np.cumsum(step)])
    k_cart = k * (2.0 * math.pi / lattice_constant_A)
    f = f"{fraction:g}"
    names = [m.name for m in models]
    if len(set(names)) != len(names):
        raise ValueError(f"the models must differ, got {names}")
    return PathBands(
        models=tuple(names),
        energies_eV={m.name: m.energies_eV(k_cart) for m in models},
        band_names={m.name: m.band_names for m in models},
        k_cart_invA=k_cart, k_2pi_a=k, distance_2pi_a=distance,
        label_indices=np.array([0, n_per_leg - 1, second - 1, len(k) - 1]),
        labels=(f"{f} L", "Γ", f"{f} X|Γ", f"{f} K"),
        leg_starts=np.array([0, second]), fraction=float(fraction),
        k_max_invA=float(np.linalg.norm(k_cart, axis=1).max()))
