"""Slope corrections of a continuous form factor at its shells, and their regularised fit.

Tabulated form factors fix v(q) only at the reference shells |G_k|; every deformation potential
also depends on the slopes v′(|G_k|) (:mod:`bandpert.planewave.strain_potential`), which a
fitted functional form leaves to chance. bandpert adds to a species' v(q) the correction

    c(q) = Σ_k δ_k φ_k(q),      φ_k(q) = (q − q_k) B((q − q_k)/h_k),
    B(x) = (1 − x²)³ for |x| < 1, 0 otherwise,

so that c(q_k) = 0 and c′(q_k) = δ_k, while c and c′ vanish outside (q_k − h_k, q_k + h_k)
(B(0) = 1, B′(0) = 0; B, B′ and B″ vanish at |x| = 1, so c is C², like the taper). With each
half-width h_k at most half the distance to the neighbouring lattice shells
(:func:`shell_half_widths`), the correction is zero at every lattice G of the reference
crystal: the tabulated V(G) stay exact there, and only the slopes at the shells change by δ_k.
The slope changes are fixed by measured deformation potentials
(:func:`regularised_slope_changes`; the conditions are assembled in
:mod:`bandpert.physics.deformation_fit`). The construction is bandpert's own (a compactly
supported smooth bump; common practice, no source); its physical content is the measured
deformation potentials it is fitted to, each with its source in the material file.
"""

from __future__ import annotations

import numpy as np

from ..input.potential_input import BUMP_PEAK

__all__ = ["BUMP_PEAK", "regularised_slope_changes", "shell_half_widths", "slope_correction",
           "slope_correction_slope"]

#: Default Tikhonov weight: a slope change of 1 eV·Å costs as much as missing a target by this
#: fraction of its uncertainty. Small, so the measured targets decide wherever they can, but
#: slopes no condition sees stay at the functional form's own.
DEFAULT_RIDGE = 0.05


def _x(q_invA: np.ndarray | float, centres: np.ndarray, half_widths: np.ndarray
       ) -> tuple[np.ndarray, np.ndarray]:
    q = np.asarray(q_invA, dtype=float)[..., None]
    d = q - centres
    return d, d / half_widths


def slope_correction(q_invA: np.ndarray | float, centres_invA, half_widths_invA,
                     changes) -> np.ndarray:
    """c(q) = Σ_k δ_k (q − q_k) B((q − q_k)/h_k) (module docstring), unit of δ × Å⁻¹.

    Parameters
    ----------
    q_invA : array_like
        |q| in Å⁻¹ (any shape).
    centres_invA, half_widths_invA : sequence of float
        q_k and h_k (Å⁻¹).
    changes : sequence of float
        δ_k, the slope change at q_k (energy × Å).

    Returns
    -------
    numpy.ndarray
        Shape of ``q_invA``; zero for no corrections.
    """
    c = np.asarray(centres_invA, dtype=float)
    if c.size == 0:
        return np.zeros(np.shape(q_invA))
    d, x = _x(q_invA, c, np.asarray(half_widths_invA, dtype=float))
    bump = np.where(np.abs(x) < 1.0, (1.0 - x * x) ** 3, 0.0)
    return np.sum(np.asarray(changes, dtype=float) * d * bump, axis=-1)


def slope_correction_slope(q_invA: np.ndarray | float, centres_invA, half_widths_invA,
                           changes) -> np.ndarray:
    """dc/dq = Σ_k δ_k [B(x) + x B′(x)], x = (q − q_k)/h_k, B′ = −6x(1 − x²)²."""
    c = np.asarray(centres_invA, dtype=float)
    if c.size == 0:
        return np.zeros(np.shape(q_invA))
    _, x = _x(q_invA, c, np.asarray(half_widths_invA, dtype=float))
    inside = np.abs(x) < 1.0
    one = 1.0 - x * x
    d = np.where(inside, one**3 - 6.0 * x * x * one**2, 0.0)
    return np.sum(np.asarray(changes, dtype=float) * d, axis=-1)


def shell_half_widths(shell_q_invA: np.ndarray, last_listed_invA: float) -> np.ndarray:
    """Half-widths h_k of the bumps at the lattice shells q_k (sorted, Å⁻¹).

    h_k = ½ min(q_k − q_{k−1}, q_{k+1} − q_k) with q_0 = 0, so no bump reaches another lattice
    shell; the last listed shell has no upper neighbour in this rule, since the taper switches
    off every G beyond it (:data:`bandpert.planewave.formfactor.TAPER_GAP_FRACTION`).
    """
    q = np.asarray(shell_q_invA, dtype=float)
    lower = np.diff(np.r_[0.0, q])
    upper = np.r_[np.diff(q), np.inf]
    upper = np.where(q >= last_listed_invA * (1 - 1e-9), np.inf, upper)
    return 0.5 * np.minimum(lower, upper)


def regularised_slope_changes(coefficients: np.ndarray, misses_eV: np.ndarray,
                              uncertainties_eV: np.ndarray, ridge: float = DEFAULT_RIDGE
                              ) -> np.ndarray:
    """Slope changes δ minimising Σ_t ((A δ − m)_t/σ_t)² + ridge² Σ_k δ_k² (δ in eV·Å).

    Tikhonov-regularised linear least squares (common practice, no source): A[t, k] is the
    response of target t to the slope at shell k (Å⁻¹), m_t = target − response of the
    unchanged form (eV), σ_t the target's uncertainty (eV).

    Parameters
    ----------
    coefficients : numpy.ndarray
        A, (n_targets, n_slopes).
    misses_eV, uncertainties_eV : numpy.ndarray
        m and σ, (n_targets,).
    ridge : float
        Weight of ‖δ‖ (per eV·Å, in units of σ).

    Returns
    -------
    numpy.ndarray
        δ, (n_slopes,).
    """
    a = np.asarray(coefficients, dtype=float) / np.asarray(uncertainties_eV)[:, None]
    m = np.asarray(misses_eV, dtype=float) / np.asarray(uncertainties_eV)
    n = a.shape[1]
    stacked = np.vstack([a, ridge * np.eye(n)])
    rhs = np.r_[m, np.zeros(n)]
    return np.linalg.lstsq(stacked, rhs, rcond=None)[0]
