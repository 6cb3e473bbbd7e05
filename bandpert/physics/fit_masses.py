"""Mass targets of a fit: the three-point stencil and its parameter derivative.

A mass target is m*/m0 = σ 2C h² / Δ, Δ = E(k0 − h d) − 2E(k0) + E(k0 + h d), C = ħ²/2m0,
σ = −1 for a valence band (hole masses positive at a maximum), +1 otherwise, h = s·2π/a; k0 and
the step are fixed in fractions of the reciprocal vectors (so a change of the lattice constant
moves both), and every stencil point is diagonalised on one set of plane waves fixed at the start
of the fit. With spin–orbit coupling E is the mean of the Kramers pair holding the band (in a
crystal without inversion a single branch is not analytic at the point).

The derivative needs no further diagonalisation beyond the three with eigenvectors:

    ∂m/∂p = σ 2C (2h h′ Δ − h² Δ′) / Δ²,   Δ′ = Σ_s w_s ∂E_s/∂p,  w = (1, −2, 1),

with ∂E_s/∂p = ⟨n_s|∂H/∂p|n_s⟩ by Hellmann–Feynman at each stencil point (the mean over the pair;
within a degenerate group the member's eigenvalue of ∂H/∂p in the group, one-sided where the
parameter splits it: :mod:`bandpert.physics.fit_states`; at spin–orbit strength 0 the heavy holes
along [100] are a spinor quartet at k0 ± h d that the strength splits),
∂H/∂p = [H(p + δ) − H(p − δ)]/(2δ) on the same plane waves, and h′ from the lattice constant.
At a minimum off the labelled points (:mod:`bandpert.physics.fit_valley`) the stencil is centred on
the minimum found for the current parameters, which moves with p: the total derivative adds
(∂m/∂t)(dt_min/dp), with dt_min/dp = −(∂²E/∂k∂p)/(∂²E/∂k²)/L from the Hellmann–Feynman derivatives
of a stencil along the line (L its length in Å⁻¹; the implicit function theorem on ∂E/∂k = 0) and
∂m/∂t = −m Δ_t/Δ with Δ_t = Σ_s w_s ∂E_s/∂t, again by Hellmann–Feynman, ∂E_s/∂t =
⟨n_s|∂H/∂k·(dk/dt)|n_s⟩ (:func:`minimum_mass_derivatives`). The eigenpairs come from the fit's
:class:`~bandpert.physics.fit_states.PointStates`, where the residuals at the same parameters left
them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..crystal.lattice import reciprocal_vectors
from ..input.material import Material
from ..units import HBAR2_OVER_2M0_EV_A2 as C
from .fit_states import ParameterSlopes, PointStates

#: Stencil weights of the second difference.
WEIGHTS = np.array([1.0, -2.0, 1.0])


@dataclass(frozen=True)
class Stencil:
    """Where a mass is taken: plane waves, centre and direction, band.

    Attributes
    ----------
    miller : numpy.ndarray
        (n, 3) the fixed plane waves.
    k0_frac : numpy.ndarray
        (3,) centre in fractions of the reciprocal vectors.
    direction : numpy.ndarray
        (3,) unit Cartesian direction (of the starting lattice: cubic strain-free parameters
        keep it; a lattice constant scales k, not directions).
    band : int
        0-based band index (spinor count with spin–orbit).
    step_frac : float
        h in units of 2π/a.
    sign : float
        −1 for a valence band, +1 otherwise.
    spinor : bool
    """

    miller: np.ndarray
    k0_frac: np.ndarray
    direction: np.ndarray
    band: int
    step_frac: float
    sign: float
    spinor: bool

    def points(self, material: Material) -> tuple[np.ndarray, float]:
        """(3, 3) Cartesian stencil points (Å⁻¹) and h (Å⁻¹) for the material's lattice."""
        k0 = self.k0_frac @ reciprocal_vectors(material.vectors_A)
        h = self.step_frac * 2.0 * np.pi / material.a_A
        return k0[None, :] + np.array([-1.0, 0.0, 1.0])[:, None] * h * self.direction, h

    def members(self) -> slice:
        """The band, or the Kramers pair holding it."""
        first = self.band - self.band % 2 if self.spinor else self.band
        return slice(first, first + (2 if self.spinor else 1))


def stencil_mass(states: PointStates, stencil: Stencil) -> float:
    """m*/m0 of the stencil (module docstring), from the eigenvalues kept in ``states``."""
    ks, h = stencil.points(states.material)
    e = np.array([states.eigenpairs(stencil.miller, k)[0][stencil.members()].mean()
                  for k in ks])
    return float(stencil.sign * 2.0 * C * h * h / (WEIGHTS @ e))


def stencil_energy_derivatives(states: PointStates, slopes: ParameterSlopes, stencil: Stencil
                               ) -> tuple[np.ndarray, np.ndarray, float, np.ndarray]:
    """Stencil energies and their Hellmann–Feynman derivatives (module docstring).

    Returns
    -------
    e : numpy.ndarray
        (3,) E at k0 − h d, k0, k0 + h d (eV; the Kramers-pair mean with spin–orbit).
    d_e : numpy.ndarray
        (3, n_parameters) ∂E_s/∂p.
    h : float
        The step (Å⁻¹).
    d_h : numpy.ndarray
        (n_parameters,) ∂h/∂p (non-zero for the lattice constant only).
    """
    ks, h = stencil.points(states.material)
    pair = stencil.members()
    e = np.array([states.eigenpairs(stencil.miller, k)[0][pair].mean() for k in ks])
    d_e = np.array([slopes.at(stencil.miller, lambda m, s=s: stencil.points(m)[0][s])[pair]
                    .mean(axis=0) for s in range(3)])
    d_h = np.array([(stencil.points(plus)[1] - stencil.points(minus)[1]) / (2 * step)
                    for plus, minus, step in slopes.perturbed])
    return e, d_e, h, d_h


def stencil_mass_derivatives(states: PointStates, slopes: ParameterSlopes, stencil: Stencil
                             ) -> np.ndarray:
    """∂m/∂p at a fixed stencil centre, for every parameter (module docstring).

    Parameters
    ----------
    states : PointStates
        At the current parameters.
    slopes : ParameterSlopes
        ∂H/∂p of the same states.
    stencil : Stencil

    Returns
    -------
    numpy.ndarray
        (n_parameters,) in m0 per unit of each parameter.
    """
    e, d_e, h, d_h = stencil_energy_derivatives(states, slopes, stencil)
    delta = float(WEIGHTS @ e)
    d_delta = WEIGHTS @ d_e
    return stencil.sign * 2.0 * C * (2 * h * d_h * delta - h * h * d_delta) / delta**2


def minimum_mass_derivatives(states: PointStates, slopes: ParameterSlopes, stencil: Stencil,
                             along: Stencil, line_length_invA: float, line_frac: np.ndarray
                             ) -> np.ndarray:
    """dm/dp of a mass at a minimum that moves along a line with the parameters.

    Parameters
    ----------
    states : PointStates
    slopes : ParameterSlopes
    stencil : Stencil
        The mass's stencil, centred on the minimum.
    along : Stencil
        A stencil centred on the minimum along the line (unit direction of the line).
    line_length_invA : float
        |k(t = 1) − k(t = 0)| (Å⁻¹).
    line_frac : numpy.ndarray
        (3,) k(1) − k(0) in fractions of the reciprocal vectors.

    Returns
    -------
    numpy.ndarray
        (n_parameters,) total derivative (module docstring).
    """
    fixed = stencil_mass_derivatives(states, slopes, stencil)
    e, d_e, h, _ = stencil_energy_derivatives(states, slopes, along)
    curvature = float(WEIGHTS @ e) / h**2               # ∂²E/∂k² along the line
    d_slope = (d_e[2] - d_e[0]) / (2.0 * h)             # ∂²E/∂k∂p
    d_t = -d_slope / curvature / line_length_invA       # dt_min/dp
    # ∂m/∂t = −m Δ_t/Δ, Δ_t = Σ_s w_s ⟨n_s|∂H/∂k·dk/dt|n_s⟩ (the stencil moved along the line)
    ks, _ = stencil.points(states.material)
    dk_dt = line_frac @ reciprocal_vectors(states.material.vectors_A)
    pair = stencil.members()
    e_s = np.array([states.eigenpairs(stencil.miller, k)[0][pair].mean() for k in ks])
    de_dt = np.array([states.k_slope(stencil.miller, k, dk_dt)[pair].mean() for k in ks])
    delta = float(WEIGHTS @ e_s)
    mass = stencil.sign * 2.0 * C * h * h / delta
    dm_dt = -mass * float(WEIGHTS @ de_dt) / delta
    return fixed + dm_dt * d_t
