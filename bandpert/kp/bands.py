"""Bands of a k·p model: along straight lines through Γ (and along a Brillouin-zone path).

Energies are eV from the valence-band top at Γ (:data:`~bandpert.kp.hamiltonians.ENERGY_ZERO`),
k in Å⁻¹ and, where the model knows its lattice constant, in units of 2π/a.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .hamiltonians import ENERGY_ZERO, KPModel
from .parameters import unit_vector

__all__ = ["DirectionalBands", "bands_along"]

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

