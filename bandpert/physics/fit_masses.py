"""Mass targets of a fit: the three-point stencil and its parameter derivative.

A mass target is m*/m0 = σ 2C h² / Δ, Δ = E(k0 − h d) − 2E(k0) + E(k0 + h d), C = ħ²/2m0,
σ = −1 for a valence band (hole masses positive at a maximum), +1 otherwise, h = s·2π/a; k0 and
the step are fixed in fractions of the reciprocal vectors (so a change of the lattice constant
moves both), and every stencil point is diagonalised on one set of plane waves fixed at the start
of the fit. With spin–orbit coupling E is the mean of the Kramers pair holding the band (in a
crystal without inversion a single branch is not analytic at the point).

The derivative needs no further diagonalisation beyond the three with eigenvectors:

    ∂m/∂p = σ 2C (2h h′ Δ − h² Δ′) / Δ²,   Δ′ = Σ_s w_s ∂E_s/∂p,  w = (1, −2, 1),

with ∂E_s/∂p = ⟨n_s|∂H/∂p|n_s⟩ by Hellmann–Feynman at each stencil point (the mean over the
pair), ∂H/∂p = [H(p + δ) − H(p − δ)]/(2δ) on the same plane waves, and h′ from the lattice
constant. At a minimum off the labelled points (:mod:`bandpert.physics.fit_valley`) the stencil is
centred on the minimum found for the current parameters, which moves with p: the total
derivative adds (∂m/∂t)(dt_min/dp), with dt_min/dp = −(∂²E/∂k∂p)/(∂²E/∂k²)/L from the
Hellmann–Feynman derivatives of a stencil along the line (L its length in Å⁻¹; the implicit
function theorem on ∂E/∂k = 0) and ∂m/∂t by a central difference of the mass along the line
(:func:`minimum_mass_derivatives`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..crystal.lattice import reciprocal_vectors
from ..input.material import Material
from ..planewave.model import PlaneWaveModel, model_on_miller
from ..units import HBAR2_OVER_2M0_EV_A2 as C

#: Builds (or looks up) the model of a material on a set of plane waves.
ModelOf = Callable[[Material, np.ndarray], PlaneWaveModel]

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


def _fresh(material: Material, miller: np.ndarray):
    return model_on_miller(material, miller)


def stencil_mass(material: Material, stencil: Stencil, vectors: bool = False,
                 model_of: ModelOf = _fresh):
    """m*/m0 of the stencil (module docstring); with ``vectors`` also the eigenpairs used.

    Returns
    -------
    float, or (float, list of (eigenvalues, eigenvectors), float)
        The mass; with ``vectors`` also the eigenpairs at the three points and h.
    """
    model = model_of(material, stencil.miller)
    ks, h = stencil.points(material)
    top = stencil.members().stop - 1
    pairs = [scipy.linalg.eigh(model.hamiltonian(k), eigvals_only=not vectors,
                               subset_by_index=(0, top), driver="evr", check_finite=False)
             for k in ks]
    e = np.array([(p[0] if vectors else p)[stencil.members()].mean() for p in pairs])
    delta = float(WEIGHTS @ e)
    mass = stencil.sign * 2.0 * C * h * h / delta
    return (mass, pairs, h) if vectors else mass


def stencil_energy_derivatives(material: Material, stencil: Stencil,
                               perturbed: list[tuple[Material, Material, float]],
                               model_of: ModelOf = _fresh
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
    _, pairs, h = stencil_mass(material, stencil, vectors=True, model_of=model_of)
    e = np.array([w[stencil.members()].mean() for w, _ in pairs])
    d_e = np.zeros((3, len(perturbed)))
    d_h = np.zeros(len(perturbed))
    for j, (plus, minus, step) in enumerate(perturbed):
        k_plus, h_plus = stencil.points(plus)
        k_minus, h_minus = stencil.points(minus)
        m_plus = model_of(plus, stencil.miller)
        m_minus = model_of(minus, stencil.miller)
        for s, (_, c) in enumerate(pairs):
            dh = (m_plus.hamiltonian(k_plus[s]) - m_minus.hamiltonian(k_minus[s])) / (2 * step)
            vec = c[:, stencil.members()]
            d_e[s, j] = float(np.real(np.einsum("in,ij,jn->n", vec.conj(), dh, vec)).mean())
        d_h[j] = (h_plus - h_minus) / (2 * step)
    return e, d_e, h, d_h


def stencil_mass_derivatives(material: Material, stencil: Stencil,
                             perturbed: list[tuple[Material, Material, float]],
                             model_of: ModelOf = _fresh) -> np.ndarray:
    """∂m/∂p at a fixed stencil centre, for every parameter (module docstring).

    Parameters
    ----------
    material : Material
        At the current parameters.
    stencil : Stencil
    perturbed : list of (Material, Material, float)
        Per parameter: the material at p + δ, at p − δ, and δ.

    Returns
    -------
    numpy.ndarray
        (n_parameters,) in m0 per unit of each parameter.
    """
    e, d_e, h, d_h = stencil_energy_derivatives(material, stencil, perturbed, model_of)
    delta = float(WEIGHTS @ e)
    d_delta = WEIGHTS @ d_e
    return stencil.sign * 2.0 * C * (2 * h * d_h * delta - h * h * d_delta) / delta**2


#: Step in t of the central difference ∂m/∂t at a minimum on a line.
T_STEP = 1e-3


def minimum_mass_derivatives(material: Material, stencil: Stencil, along: Stencil,
                             line_length_invA: float, line_frac: np.ndarray,
                             perturbed: list[tuple[Material, Material, float]],
                             model_of: ModelOf = _fresh) -> np.ndarray:
    """dm/dp of a mass at a minimum that moves along a line with the parameters.

    Parameters
    ----------
    material : Material
    stencil : Stencil
        The mass's stencil, centred on the minimum.
    along : Stencil
        A stencil centred on the minimum along the line (unit direction of the line).
    line_length_invA : float
        |k(t = 1) − k(t = 0)| (Å⁻¹).
    line_frac : numpy.ndarray
        (3,) k(1) − k(0) in fractions of the reciprocal vectors.
    perturbed : list of (Material, Material, float)
    model_of : callable
        ``model_of(material, miller)`` (a cache of models; default builds each anew).

    Returns
    -------
    numpy.ndarray
        (n_parameters,) total derivative (module docstring).
    """
    fixed = stencil_mass_derivatives(material, stencil, perturbed, model_of)
    e, d_e, h, _ = stencil_energy_derivatives(material, along, perturbed, model_of)
    curvature = float(WEIGHTS @ e) / h**2               # ∂²E/∂k² along the line
    d_slope = (d_e[2] - d_e[0]) / (2.0 * h)             # ∂²E/∂k∂p
    d_t = -d_slope / curvature / line_length_invA       # dt_min/dp
    shifted = [Stencil(stencil.miller, stencil.k0_frac + s * T_STEP * line_frac,
                       stencil.direction, stencil.band, stencil.step_frac, stencil.sign,
                       stencil.spinor) for s in (-1.0, 1.0)]
    dm_dt = (stencil_mass(material, shifted[1], model_of=model_of)
             - stencil_mass(material, shifted[0], model_of=model_of)) / (2.0 * T_STEP)
    return fixed + dm_dt * d_t
