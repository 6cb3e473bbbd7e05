"""Plane-wave (nearly-free-electron / empirical-pseudopotential) model of a crystal.

    H(k)_{GG'} = ħ²|k+G|²/(2m0) δ_{GG'} + V(G − G')

H0 (the kinetic diagonal, which depends on k) and V (the potential matrix, the same at every k for
a local potential) are kept apart: the exact solver adds them, the perturbative solver treats V as
the perturbation of H0. The basis is a fixed set of reciprocal-lattice vectors with
ħ²|G|²/2m0 ≤ cutoff, independent of k (:mod:`bandpert.planewave.basis`).

Basis layout: the Hamiltonian index runs over (component, G) with the component index slowest;
``n_components`` is 1 for the spinless models here, so a spinor extension only adds a second
component block and a spin–orbit term without changing the G bookkeeping.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..crystal.lattice import reciprocal_vectors
from ..errors import InputError
from ..input.material import Material
from ..units import HBAR2_OVER_2M0_EV_A2
from .basis import MAX_BASIS, PlaneWaveBasis, plane_wave_basis
from .potential import check_shells_exist, fourier_coefficients


@dataclass(frozen=True)
class PlaneWaveModel:
    """H0 and V of a plane-wave model, kept apart.

    Attributes
    ----------
    basis : PlaneWaveBasis
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors (rows, Å⁻¹).
    potential_eV : numpy.ndarray
        (n, n) Hermitian V(G − G'); real symmetric (float64) when every V(G) is real, which
        happens for a centrosymmetric crystal with the origin at an inversion centre.
    """

    basis: PlaneWaveBasis
    reciprocal_invA: np.ndarray
    potential_eV: np.ndarray

    @property
    def size(self) -> int:
        """Basis size."""
        return self.basis.size

    @property
    def is_real(self) -> bool:
        """True when H(k) is real symmetric at every k."""
        return not np.iscomplexobj(self.potential_eV)

    def kinetic_eV(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """H0: ħ²|k+G|²/2m0 for each k (rows) and G (columns), shape (n_k, n) in eV."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        kg = k[:, None, :] + self.basis.g_cart_invA[None, :, :]
        return HBAR2_OVER_2M0_EV_A2 * np.einsum("kgi,kgi->kg", kg, kg)

    def hamiltonian(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """Full H(k) = H0(k) + V for one k-point, shape (n, n)."""
        h = self.potential_eV.copy()
        idx = np.arange(self.size)
        h[idx, idx] += self.kinetic_eV(k_cart_invA)[0]
        return h


def build_model(material: Material, cutoff_eV: float) -> PlaneWaveModel:
    """Build the plane-wave model of a material at a given cutoff.

    The potential matrix V_{GG'} = V(G − G') is built once, vectorised over all pairs.

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Kinetic-energy cutoff.

    Returns
    -------
    PlaneWaveModel
    """
    b = reciprocal_vectors(material.vectors_A)
    basis = plane_wave_basis(b, cutoff_eV)
    if basis.size > MAX_BASIS:
        gib = basis.size**2 * 16 / 2**30
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV gives {basis.size} plane waves "
                         f"(matrices of {gib:.1f} GiB each; the limit is {MAX_BASIS}); expected a "
                         "smaller cutoff", material.file, "basis.cutoff_eV")
    check_shells_exist(material, basis)
    diff = basis.miller[:, None, :] - basis.miller[None, :, :]
    v = fourier_coefficients(material, diff)
    if not np.allclose(v, v.conj().T, atol=1e-12):
        raise InputError("the potential matrix is not Hermitian; expected V(-G) = V(G)*",
                         material.file, "potential")
    if np.max(np.abs(v.imag), initial=0.0) <= 1e-12 * max(1.0, np.max(np.abs(v), initial=0.0)):
        v = np.ascontiguousarray(v.real)
    return PlaneWaveModel(basis=basis, reciprocal_invA=b, potential_eV=v)
