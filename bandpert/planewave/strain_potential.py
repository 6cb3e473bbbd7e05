"""Strain derivatives of the continuous potential: dv/dq, the taper's slope, and ∂V(G)/∂ε.

First-order strain perturbation of a local pseudopotential in the continuous form of
:mod:`bandpert.planewave.potential` (used by :mod:`bandpert.physics.deformation` and by the fit
conditions of :mod:`bandpert.planewave.formfactor`).
"""

from __future__ import annotations

import numpy as np

from ..input.material import Material
from .potential import continuous_scale, species_form_factor, taper_weight
from .slope_form import slope_correction_slope


def continuous_form_factor_slope(q_invA: np.ndarray | float, a1: float, a2_invA2: float,
                                 a3: float, a4_A2: float) -> np.ndarray:
    """dv/dq of v(q) = a1 (q² − a2) D/(a3 − D), D = e^{−a4 q²} (eV·Å for a1 in eV).

    dv/dq = 2q a1 [D/(a3 − D) − (q² − a2) a4 a3 D/(a3 − D)²] (differentiating
    :func:`continuous_form_factor`).
    """
    q = np.asarray(q_invA, dtype=float)
    q2 = q * q
    decay = np.exp(-a4_A2 * q2)
    den = a3 - decay
    return 2.0 * q * a1 * (decay / den - (q2 - a2_invA2) * a4_A2 * a3 * decay / den**2)


def species_form_factor_slope(material: Material, species: str, q_invA: np.ndarray | float
                              ) -> np.ndarray:
    """dv/dq of :func:`~bandpert.planewave.potential.species_form_factor` (eV·Å)."""
    pot = material.potential
    dv = continuous_form_factor_slope(q_invA, *pot.continuous[species])
    bumps = pot.slope_corrections.get(species)
    if bumps:
        dv = dv + slope_correction_slope(q_invA, *zip(*bumps, strict=True))
    return dv


def taper_slope(q_invA: np.ndarray | float, q1_invA: float, q2_invA: float) -> np.ndarray:
    """dw/dq of :func:`taper_weight`: −30 t²(1 − t)²/(q2 − q1) inside the switch, 0 outside."""
    t = np.clip((np.asarray(q_invA, dtype=float) - q1_invA) / (q2_invA - q1_invA), 0.0, 1.0)
    return -30.0 * t**2 * (1.0 - t) ** 2 / (q2_invA - q1_invA)


def strain_derivative_of_potential(material: Material, g_cart_invA: np.ndarray,
                                   strain: np.ndarray,
                                   slopes: dict[tuple[str, int], float] | None = None,
                                   shell_of: np.ndarray | None = None) -> np.ndarray:
    """dV(G)/dε contracted with a strain direction, for the "continuous" form (eV).

    Under a homogeneous strain ε with the atoms at fixed fractional positions, G·r_j is
    unchanged, the cell measure goes as Ω(1 + tr ε) and G_i → G_i − ε_ij G_j, so with
    u_s = w v_s and V(G) = (Ω0/Ω_atom) Σ_s S_s(G) u_s(|G|):

        Σ_ij ε_ij ∂V(G)/∂ε_ij = −tr(ε) V(G) − (G·ε·G/|G|) (Ω0/Ω_atom) Σ_s S_s(G) u_s′(|G|)

    (first-order strain perturbation of a local pseudopotential; e.g. Yu & Cardona,
    Fundamentals of Semiconductors, 2010, §3.3; from memory).

    Parameters
    ----------
    material : Material
        With ``potential.form == "continuous"``.
    g_cart_invA : numpy.ndarray
        (..., d) Cartesian G (Å⁻¹), e.g. the differences G − G' of a basis.
    strain : numpy.ndarray
        (d, d) symmetric strain direction.
    slopes : dict, optional
        (species, shell index) → u′ to use instead of the model's own slope on that shell
        (``shell_of`` gives the shell index of each G, −1 elsewhere); only for building the
        linear conditions of a constrained fit.
    shell_of : numpy.ndarray of int, optional
        Leading shape of ``g_cart_invA``.

    Returns
    -------
    numpy.ndarray
        Complex, leading shape of ``g_cart_invA``; 0 at G = 0.
    """
    pot = material.potential
    g = np.asarray(g_cart_invA, dtype=float)
    eps = np.asarray(strain, dtype=float)
    q = np.sqrt(np.einsum("...i,...i->...", g, g))
    safe = np.where(q == 0.0, 1.0, q)
    positions = material.positions_cart_A
    scale = continuous_scale(material)
    value = np.zeros(q.shape, dtype=complex)
    slope = np.zeros(q.shape, dtype=complex)
    w = np.ones(q.shape) if pot.taper_invA is None else taper_weight(q, *pot.taper_invA)
    dw = np.zeros(q.shape) if pot.taper_invA is None else taper_slope(q, *pot.taper_invA)
    for atom, r in zip(material.atoms, positions, strict=True):
        phase = np.exp(-1j * (g @ r))
        v = species_form_factor(material, atom.species, q)
        value += w * v * phase
        if slopes is None:
            slope += (dw * v + w * species_form_factor_slope(material, atom.species, q)) * phase
        else:
            for (species, shell), s in slopes.items():
                if species == atom.species:
                    slope += np.where(shell_of == shell, s, 0.0) * phase
    stretch = np.einsum("...i,ij,...j->...", g, eps, g) / safe
    out = scale * (-np.trace(eps) * value - stretch * slope)
    return np.where(q == 0.0, 0.0, out)
