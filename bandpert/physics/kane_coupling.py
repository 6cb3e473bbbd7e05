"""Kane's momentum matrix element Ep and the s-like conduction state at Γ, with nonlocal wells.

Kane's Ep = 2|⟨S|p_x|X⟩|²/m0 (E. O. Kane, J. Phys. Chem. Solids 1, 249 (1957)) is the coupling
of the s-like conduction state to the p-like valence triplet through the velocity. For a
Hamiltonian whose potential depends on k the velocity is ∂H/∂(ħk), not p/m, so here

    Ep_a = Σ_j |⟨c|∂H/∂k_a|v_j⟩|² / C,     C = ħ²/2m0,

the sum over the triplet j making it independent of the basis the degenerate eigenvectors come
in. For a local model ∂H/∂k = 2βC(k + G) (β the kinetic factor) and this is 4C Σ_j |π^a_{c v_j}|²
with π = β⟨k + G⟩ (:mod:`bandpert.physics.mass_tensor`). A nonlocal square well
(:mod:`bandpert.planewave.nonlocal_term`) depends on k through |k + G| and the angle between
k + G and k + G′, so ∂V_NL/∂k ≠ 0: ∂H/∂k is the kinetic part exactly plus a central difference
of the model's own V(k) (potential and wells) on the one basis centred on Γ, at ±δ,
δ = 1e-3·2π/a (:mod:`bandpert.physics.hamiltonian_derivatives`, shared with the Γ8 sum over
states and the van Hove classification; error O(δ²); for a local model the difference is 0).

The model is spinless with its wells: Ep belongs to the spinless p-like triplet, and the
spin–orbit term's own velocity is left out. The s-like state is the lowest non-degenerate state
above the triplet that couples to it (Γ2′ of diamond, Γ1 of zincblende). In silicon the p-like
Γ15 triplet lies below Γ2′ and couples to the valence triplet too (Kane's Q), but it is threefold,
not the Kane models' conduction band; :func:`bandpert.physics.kp_from_planewave.conduction_at_gamma`
names it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..errors import InputError
from ..input.material import Material
from ..planewave.model import centred_model
from ..planewave.solver import single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²
from .hamiltonian_derivatives import MATRIX_STEP, hamiltonian_derivatives
from .mass_tensor import DEGENERACY_TOL_EV

#: A conduction state couples to the valence triplet when Σ|π|² exceeds this (Å⁻²), i.e. when
#: its Ep exceeds 4C times this.
COUPLING_FLOOR_INVA2 = 1e-6


def s_like_conduction(material: Material, energies_eV: np.ndarray, triplet: np.ndarray,
                      velocity_eV_A: np.ndarray) -> tuple[int, np.ndarray]:
    """The s-like conduction state at Γ and Ep per axis from the velocity on the triplet.

    Parameters
    ----------
    material : Material
        For the error message.
    energies_eV : numpy.ndarray
        (n,) ascending energies at Γ.
    triplet : numpy.ndarray
        Indices of the valence triplet.
    velocity_eV_A : numpy.ndarray
        (3, 3, n) ⟨v_j|∂H/∂k_a|m⟩ for the triplet (rows) and every state m.

    Returns
    -------
    conduction : int
        The lowest non-degenerate state above the triplet that couples to it.
    ep_per_axis_eV : numpy.ndarray
        (3,) Σ_j |⟨c|∂H/∂k_a|v_j⟩|²/C (module docstring).
    """
    weight = np.sum(np.abs(velocity_eV_A) ** 2, axis=1) / C  # (3, n): Ep_a of every state
    floor = 4.0 * C * COUPLING_FLOOR_INVA2  # the floor on Σ|π|², as an energy
    for c in range(triplet.max() + 1, len(energies_eV)):
        single = np.count_nonzero(np.abs(energies_eV - energies_eV[c]) <= DEGENERACY_TOL_EV) == 1
        if single and weight[:, c].sum() > floor:
            return c, weight[:, c]
    raise InputError("no s-like conduction state at Γ couples to the valence top",
                     material.file, "potential")


@dataclass(frozen=True)
class KaneCoupling:
    """The valence triplet and s-like conduction state at Γ of a spinless model with its wells.

    Attributes
    ----------
    energies_eV : numpy.ndarray
        (n,) ascending energies at Γ (absolute).
    valence_bands : numpy.ndarray
        Indices of the valence triplet.
    conduction_band : int
        Index of the s-like conduction state.
    ep_per_axis_eV : numpy.ndarray
        (3,) Ep along x, y, z (module docstring).
    """

    energies_eV: np.ndarray
    valence_bands: np.ndarray
    conduction_band: int
    ep_per_axis_eV: np.ndarray

    @property
    def ep_eV(self) -> float:
        """Ep, the mean over the axes."""
        return float(self.ep_per_axis_eV.mean())

    @property
    def isotropy(self) -> float:
        """Largest relative spread of Ep between x, y and z (0 for a cubic crystal)."""
        return float(np.ptp(self.ep_per_axis_eV) / self.ep_eV)


def kane_coupling(material: Material, cutoff_eV: float) -> KaneCoupling:
    """Ep and the s-like conduction state of the spinless model with its nonlocal wells.

    Ep_a = Σ_j |⟨c|∂H/∂k_a|v_j⟩|²/C (Kane, J. Phys. Chem. Solids 1, 249 (1957); module
    docstring) on the basis centred on Γ; ∂H/∂k = 2βC(k + G) + ∂V(k)/∂k, the second term a
    central difference of the model's V(k) (potential and nonlocal wells) at ±δ,
    δ = :data:`~bandpert.physics.hamiltonian_derivatives.MATRIX_STEP`·2π/a
    (:func:`~bandpert.physics.hamiltonian_derivatives.hamiltonian_derivatives`; O(δ²); zero for
    a local model, which gives back 4C Σ_j |π^a_{c v_j}|² to rounding). A ``spin_orbit`` table
    is ignored here.

    Raises
    ------
    InputError
        If the valence top at Γ is not threefold, or no s-like state couples to it.
    """
    spinless = material.without_spin_orbit()
    # spin_orbit=True: this caller handles the k-dependent wells (the material is spinless)
    model = centred_model(spinless, cutoff_eV, np.zeros(3), spin_orbit=True)
    top = material.valence_electrons // 2 - 1
    with single_blas_thread():
        der = hamiltonian_derivatives(model, np.zeros(3), MATRIX_STEP * 2.0 * np.pi / material.a_A)
        w, vec = scipy.linalg.eigh(der.hamiltonian_eV, check_finite=False)
        triplet = np.flatnonzero(np.abs(w - w[top]) <= DEGENERACY_TOL_EV)
        if triplet.size != 3:
            raise InputError(f"the valence top at Γ is {triplet.size}-fold, expected the "
                             "threefold p-like level of a cubic semiconductor", material.file,
                             "electrons")
        velocity = der.first_projected(vec[:, triplet], vec)  # ⟨v_j|∂H/∂k_a|m⟩
    conduction, per_axis = s_like_conduction(material, w, triplet, velocity)
    return KaneCoupling(energies_eV=w, valence_bands=triplet, conduction_band=conduction,
                        ep_per_axis_eV=per_axis)
