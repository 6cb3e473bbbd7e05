"""Nonlocal (angular-momentum-dependent) square-well corrections to a plane-wave model.

Each species s may carry, for l = 0 and l = 2, a well of depth A_l and radius R_l acting only on
the l component of the wave function around each atom, V_NL = Σ_l A_l θ(R_l − r) |l⟩⟨l|, the
form of Chelikowsky & Cohen, Phys. Rev. B 14, 556 (1976) (quoted from memory). Its plane-wave
matrix elements are

    V_NL(K, K′) = (4π/Ω_atom) Σ_s S_s(G − G′) Σ_l (2l + 1) A_l P_l(cos θ_KK′) F_l(K, K′),
    F_l(K, K′) = ∫_0^R_l j_l(Kr) j_l(K′r) r² dr,

with K = k + G, Ω_atom the cell volume per atom and S_s the structure factor of the species
(:func:`bandpert.planewave.spinorbit.structure_factors`). The depths are constants (the
energy-independent form); an energy-dependent depth is not offered (DEVELOPERS.md, "Nonlocal
wells: why the depth is constant"). F_l has the closed (Lommel) forms

    F_l = R² [K′ j_{l−1}(K′R) j_l(KR) − K j_{l−1}(KR) j_l(K′R)] / (K² − K′²),   K ≠ K′,
    F_l = (R³/2) [j_l(KR)² − j_{l−1}(KR) j_{l+1}(KR)],                            K = K′,

with j_{−1}(x) = cos(x)/x (G. N. Watson, A Treatise on the Theory of Bessel Functions, 1944,
§5.11; from memory; checked against quadrature in the tests); pairs with K′ close to K take an
expansion about the diagonal instead (:func:`radial_overlap`). The term depends on k and is built
per k like the spin–orbit term; it is Hermitian and invariant under the crystal's point group,
so it keeps every symmetry degeneracy and Kramers pairs.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import eval_legendre, spherical_jn

from ..input.material import Material

#: |K − K′| (Å⁻¹) below which F_l comes from the diagonal form and a second-order correction
#: (:func:`radial_overlap`): the Lommel quotient loses digits as K′ → K.
CLOSE_INVA = 5e-4

#: |K² − K′²| (Å⁻²) below which the same holds (both K and K′ near 0).
CLOSE_SQUARES_INVA2 = 1e-5

#: |K − K′| (Å⁻¹) below which two plane waves count as equally long (symmetry partners whose
#: lengths differ by rounding only).
EQUAL_INVA = 1e-9

#: The half-separation h0 (Å⁻¹) of the well-conditioned Lommel evaluation that fixes the
#: second-order coefficient of the close pairs.
CURVATURE_STEP_INVA = 2e-3


def _k_j_lower(l: int, k: np.ndarray, radius: float) -> np.ndarray:  # noqa: E741
    """K j_{l−1}(KR), finite at K = 0 (l = 0: cos(KR)/R)."""
    if l == 0:
        return np.cos(k * radius) / radius
    return k * spherical_jn(l - 1, k * radius)


def _close_pairs(k1: np.ndarray, k2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """K² − K′² and the pairs the Lommel quotient cannot take (closer than :data:`CLOSE_INVA`,
    or with |K² − K′²| below :data:`CLOSE_SQUARES_INVA2`), broadcast over K, K′."""
    squares = k1 * k1 - k2 * k2
    return squares, (np.abs(k1 - k2) < CLOSE_INVA) | (np.abs(squares) < CLOSE_SQUARES_INVA2)


def _lommel(l: int, k1: np.ndarray, k2: np.ndarray, radius: float) -> np.ndarray:  # noqa: E741
    """F_l by the Lommel quotient (K ≠ K′; module docstring)."""
    j1, j2 = spherical_jn(l, k1 * radius), spherical_jn(l, k2 * radius)
    return (radius**2 * (_k_j_lower(l, k2, radius) * j1 - _k_j_lower(l, k1, radius) * j2)
            / (k1 * k1 - k2 * k2))


def _diagonal(l: int, k: np.ndarray, radius: float) -> np.ndarray:  # noqa: E741
    """F_l(K, K) = (R³/2)[j_l(KR)² − j_{l−1}(KR) j_{l+1}(KR)] (module docstring)."""
    a = np.maximum(k * radius, 1e-6)
    lower = np.cos(a) / a if l == 0 else spherical_jn(l - 1, a)
    return 0.5 * radius**3 * (spherical_jn(l, a) ** 2 - lower * spherical_jn(l + 1, a))


def radial_overlap(l: int, k1: np.ndarray, k2: np.ndarray, radius: float) -> np.ndarray:  # noqa: E741
    """F_l(K, K′) = ∫_0^R j_l(Kr) j_l(K′r) r² dr (module docstring), broadcast over K, K′ (Å⁻¹).

    The Lommel quotient divides a difference that vanishes as K′ → K by K² − K′², and loses
    digits there (1e-7 of F at |K − K′| ≈ 1e-9 Å⁻¹). Pairs closer than :data:`CLOSE_INVA` (or
    with |K² − K′²| below :data:`CLOSE_SQUARES_INVA2`) use instead the expansion about the
    midpoint K̄ = (K + K′)/2, h = |K − K′|/2,

        F_l(K̄ − h, K̄ + h) = F_l(K̄, K̄) + c h² + O(h⁴)

    (the integrand is even in h for even l), with c from one Lommel quotient at h0 =
    :data:`CURVATURE_STEP_INVA`, where it keeps its digits. The error is O(h² h0²); with the
    quotient's rounding, below 3e-11 Å³ for wells of up to 2 Å at any K, K′ (tested against
    30-digit quadrature), where the quotient alone was off by up to 1e-7.

    Returns
    -------
    numpy.ndarray
        In Å³.
    """
    if l % 2:
        raise ValueError(f"radial_overlap is written for even l (0, 2), got l = {l}")
    k1, k2 = np.asarray(k1, float), np.asarray(k2, float)
    # the Bessel functions of each argument once (an (n, 1) and a (1, n) input stay vectors:
    # n evaluations, not n² of them); the pairs only meet in the arithmetic below
    j1, j2 = spherical_jn(l, k1 * radius), spherical_jn(l, k2 * radius)
    squares, close = _close_pairs(k1, k2)
    diff = np.where(close, 1.0, squares)
    out = radius**2 * (_k_j_lower(l, k2, radius) * j1 - _k_j_lower(l, k1, radius) * j2) / diff
    out = np.array(np.broadcast_to(out, close.shape), dtype=float)
    if close.any():
        k1b, k2b = np.broadcast_arrays(k1, k2)
        mid = 0.5 * (k1b[close] + k2b[close])
        h = 0.5 * np.abs(k1b[close] - k2b[close])
        centre = _diagonal(l, mid, radius)
        # pairs of equal |K| (symmetry partners, equal to rounding) need no correction: c h²
        # is below 1e-17 of F there
        apart = h > EQUAL_INVA
        if apart.any():
            centre[apart] += (_lommel_about(l, mid[apart], CURVATURE_STEP_INVA, radius)
                              - centre[apart]) * (h[apart] / CURVATURE_STEP_INVA) ** 2
        out[close] = centre
    return out


def _overlap_square(l: int, k: np.ndarray, radius: float, bessel) -> np.ndarray:  # noqa: E741
    """F_l(K_i, K_j) (n, n) for the lengths ``k`` of one basis: :func:`radial_overlap` with each
    spherical Bessel function evaluated once on the vector (``bessel(order, R)``), the diagonal
    and the pairs of equal length from the same vectors; only pairs close but not equal take
    the expansion of :func:`radial_overlap`."""
    x = k * radius
    jl, jup = bessel(l, radius), bessel(l + 1, radius)
    tiny = x < 1e-6
    if l == 0:  # K j_{−1}(KR) = cos(KR)/R; j_{−1}(x) = cos(x)/x
        lower_k = np.cos(x) / radius
        lower = np.cos(x) / np.where(tiny, 1.0, x)
    else:
        lower = bessel(l - 1, radius)
        lower_k = k * lower
    squares, close = _close_pairs(k[:, None], k[None, :])
    gap = np.abs(k[:, None] - k[None, :])
    out = (radius**2 * (lower_k[None, :] * jl[:, None] - lower_k[:, None] * jl[None, :])
           / np.where(close, 1.0, squares))
    diagonal = 0.5 * radius**3 * (jl * jl - lower * jup)
    if tiny.any():  # K → 0: the diagonal form at KR = 1e-6, as radial_overlap takes it
        diagonal[tiny] = _diagonal(l, k[tiny], radius)
    equal = close & (gap <= 2.0 * EQUAL_INVA)
    i, j = np.nonzero(equal)
    out[i, j] = 0.5 * (diagonal[i] + diagonal[j])
    rest = close & ~equal
    if rest.any():
        i, j = np.nonzero(rest)
        out[i, j] = radial_overlap(l, k[i], k[j], radius)
    return out


def _lommel_about(l: int, mid: np.ndarray, h0: float, radius: float) -> np.ndarray:  # noqa: E741
    """Φ(h0) = F_l(K̄ − h0, K̄ + h0) by the Lommel quotient. F_l(−a, b) = F_l(a, b) for even l,
    so the pair is (|K̄ − h0|, K̄ + h0); for K̄ < h0 those are 2K̄ apart, and where that is too
    close for the quotient (K̄ → 0) Φ(h0) is the diagonal value at h0, to O(K̄²)."""
    a, b = np.abs(mid - h0), mid + h0
    apart = np.abs(b - a) > 1e-2 * h0
    out = _diagonal(l, np.full(mid.shape, h0), radius)
    out[apart] = _lommel(l, a[apart], b[apart], radius)
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
        cache: dict[tuple[int, float], np.ndarray] = {}

        def bessel(order: int, radius: float) -> np.ndarray:
            """j_order(|K| R) on the basis, each (order, R) evaluated once per matrix."""
            if (order, radius) not in cache:
                cache[order, radius] = spherical_jn(order, k * radius)
            return cache[order, radius]

        for s, channels in enumerate(self.channels):
            if not channels:
                continue
            radial = np.zeros(cos.shape)
            for l, depth, radius in channels:  # noqa: E741 - two channels at most
                legendre = (1.0 if l == 0 else 1.5 * cos * cos - 0.5 if l == 2
                            else eval_legendre(l, cos))
                radial += ((2 * l + 1) * depth * legendre
                           * _overlap_square(l, k, radius, bessel))
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
