"""Nonlocal (angular-momentum-dependent) square-well corrections to a plane-wave model.

Each species s may carry, for l = 0 and l = 2, a well of depth A_l and radius R_l acting only on
the l component of the wave function around each atom, V_NL = Σ_l A_l θ(R_l − r) |l⟩⟨l|, the
energy-independent form of Chelikowsky & Cohen, Phys. Rev. B 14, 556 (1976) (quoted from
memory). Its plane-wave matrix elements are

    V_NL(K, K′) = (4π/Ω_atom) Σ_s S_s(G − G′) Σ_l (2l + 1) A_l P_l(cos θ_KK′) F_l(K, K′),
    F_l(K, K′) = ∫_0^R_l j_l(Kr) j_l(K′r) r² dr,

with K = k + G, Ω_atom the cell volume per atom and S_s the structure factor of the species
(:func:`bandpert.planewave.spinorbit.structure_factors`). F_l has the closed (Lommel) forms

    F_l = R² [K′ j_{l−1}(K′R) j_l(KR) − K j_{l−1}(KR) j_l(K′R)] / (K² − K′²),   K ≠ K′,
    F_l = (R³/2) [j_l(KR)² − j_{l−1}(KR) j_{l+1}(KR)],                            K = K′,

with j_{−1}(x) = cos(x)/x (G. N. Watson, A Treatise on the Theory of Bessel Functions, 1944,
§5.11; from memory; checked against quadrature in the tests). The term depends on k and is built
per k like the spin–orbit term; it is Hermitian and invariant under the crystal's point group,
so it keeps every symmetry degeneracy and Kramers pairs.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import eval_legendre, spherical_jn

from ..input.material import Material

#: |K² − K′²| (Å⁻²) below which the diagonal form of F_l is used.
DIAGONAL_TOL_INVA2 = 1e-9


def _k_j_lower(l: int, k: np.ndarray, radius: float) -> np.ndarray:  # noqa: E741
    """K j_{l−1}(KR), finite at K = 0 (l = 0: cos(KR)/R)."""
    if l == 0:
        return np.cos(k * radius) / radius
    return k * spherical_jn(l - 1, k * radius)


def radial_overlap(l: int, k1: np.ndarray, k2: np.ndarray, radius: float) -> np.ndarray:  # noqa: E741
    """F_l(K, K′) = ∫_0^R j_l(Kr) j_l(K′r) r² dr (module docstring), broadcast over K, K′ (Å⁻¹).

    Returns
    -------
    numpy.ndarray
        In Å³.
    """
    k1, k2 = np.asarray(k1, float), np.asarray(k2, float)
    # the Bessel functions of each argument once (an (n, 1) and a (1, n) input stay vectors:
    # n evaluations, not n² of them); the pairs only meet in the arithmetic below
    j1, j2 = spherical_jn(l, k1 * radius), spherical_jn(l, k2 * radius)
    diff = k1 * k1 - k2 * k2
    close = np.abs(diff) < DIAGONAL_TOL_INVA2
    safe = np.where(close, 1.0, diff)
    out = radius**2 * (_k_j_lower(l, k2, radius) * j1 - _k_j_lower(l, k1, radius) * j2) / safe
    out = np.array(np.broadcast_to(out, close.shape), dtype=float)
    if close.any():
        k1b, k2b = np.broadcast_arrays(k1, k2)
        a = np.maximum(0.5 * (k1b[close] + k2b[close]) * radius, 1e-6)
        lower = np.cos(a) / a if l == 0 else spherical_jn(l - 1, a)
        out[close] = 0.5 * radius**3 * (spherical_jn(l, a) ** 2
                                        - lower * spherical_jn(l + 1, a))
    return out


@dataclass(frozen=True)
class NonlocalTerm:
    """Per-species channels of V_NL in the arrays the builders use.

    Attributes
    ----------
    species : tuple of str
        Sorted species names of the structure factors (all species of the atoms).
    channels : tuple
        Per species, ((l, A_l in eV, R_l in Å), …).
    atom_volume_A3 : float
        Ω_atom.
    """

    species: tuple[str, ...]
    channels: tuple[tuple[tuple[int, float, float], ...], ...]
    atom_volume_A3: float

    def matrix(self, kg_cart_invA: np.ndarray, structure: np.ndarray) -> np.ndarray:
        """V_NL(K_i, K_j) (n, n), complex, for K = k + G of a basis and S_s(G_i − G_j).

        Parameters
        ----------
        kg_cart_invA : numpy.ndarray
            (n, 3) K = k + G.
        structure : numpy.ndarray
            (n_species, n, n) S_s(G_i − G_j).
        """
        k = np.linalg.norm(kg_cart_invA, axis=1)
        safe = np.where(k > 0, k, 1.0)
        unit = kg_cart_invA / safe[:, None]
        cos = np.clip(unit @ unit.T, -1.0, 1.0)
        out = np.zeros(cos.shape, dtype=complex)
        scale = 4.0 * np.pi / self.atom_volume_A3
        for s, channels in enumerate(self.channels):
            if not channels:
                continue
            radial = np.zeros(cos.shape)
            for l, depth, radius in channels:  # noqa: E741 - two channels at most
                legendre = (1.0 if l == 0 else 1.5 * cos * cos - 0.5 if l == 2
                            else eval_legendre(l, cos))
                radial += ((2 * l + 1) * depth * legendre
                           * radial_overlap(l, k[:, None], k[None, :], radius))
            out += scale * structure[s] * radial
        return out


def nonlocal_term(material: Material) -> NonlocalTerm | None:
    """The :class:`NonlocalTerm` of a material, None without a ``nonlocal`` table."""
    nl = material.nonlocal_terms
    if nl is None:
        return None
    species = tuple(sorted({a.species for a in material.atoms}))
    return NonlocalTerm(species=species,
                        channels=tuple(nl.species.get(s, ()) for s in species),
                        atom_volume_A3=material.volume_A / len(material.atoms))
