"""Nonlocal (angular-momentum-dependent) square-well corrections to a plane-wave model.

Each species s may carry, for l = 0 and l = 2, a well of depth A_l and radius R_l acting only on
the l component of the wave function around each atom, V_NL = Σ_l A_l θ(R_l − r) |l⟩⟨l|, the
form of Chelikowsky & Cohen, Phys. Rev. B 14, 556 (1976) (quoted from memory). Its plane-wave
matrix elements are

    V_NL(K, K′) = (4π/Ω_atom) Σ_s S_s(G − G′) Σ_l (2l + 1) A_l P_l(cos θ_KK′) F_l(K, K′),
    F_l(K, K′) = ∫_0^R_l j_l(Kr) j_l(K′r) r² dr,

with K = k + G, Ω_atom the cell volume per atom and S_s the structure factor of the species
(:func:`bandpert.planewave.spinorbit.structure_factors`). F_l has the closed (Lommel) forms

    F_l = R² [K′ j_{l−1}(K′R) j_l(KR) − K j_{l−1}(KR) j_l(K′R)] / (K² − K′²),   K ≠ K′,
    F_l = (R³/2) [j_l(KR)² − j_{l−1}(KR) j_{l+1}(KR)],                            K = K′,

with j_{−1}(x) = cos(x)/x (G. N. Watson, A Treatise on the Theory of Bessel Functions, 1944,
§5.11; from memory; checked against quadrature in the tests); pairs with K′ close to K take an
expansion about the diagonal instead (:func:`radial_overlap`). The term depends on k and is built
per k like the spin–orbit term; it is Hermitian and invariant under the crystal's point group,
so it keeps every symmetry degeneracy and Kramers pairs.

**A depth that follows the state's energy.** The l = 0 depth of a species may follow the energy
E of the state it acts on, A_0(E) = A_0 + s E (the ``A0_energy_slope`` key; the idea of an
energy-dependent l = 0 well is Chelikowsky & Cohen's (1976), who evaluated it at free-electron
energies of the plane waves; here E is the eigenvalue itself). E is on the model's own scale:
the zero of the kinetic energy, with the potential's G = 0 coefficient (0 in the bundled files).
Because the dependence is linear, H(E) = H_c + E M, with H_c the Hamiltonian with every depth at
its constant part and

    M(K, K′) = (4π/Ω_atom) Σ_s s_s S_s(G − G′) F_0(K, K′; R_0,s)

(the l = 0 well of unit depth times the slope), and H(E)ψ = Eψ is the linear generalised
eigenproblem H_c ψ = E S ψ with the metric S = 1 − M, Hermitian and positive definite while
s λ_max(P_0) < 1 (P_0, the l = 0 projector inside the spheres, is a projector for wells that do
not overlap, λ_max = 1; always for s ≤ 0). Its eigenvalues are those of the ordinary Hermitian
matrix

    H(k) = S^{−1/2} H_c(k) S^{−1/2}

(Löwdin's symmetric orthogonalisation, P.-O. Löwdin, J. Chem. Phys. 18, 365 (1950); from
memory). S^{−1/2}
commutes with every operation of the crystal that S commutes with, so the matrix keeps every
symmetry degeneracy, and its eigenvectors are S^{1/2}ψ, which carry the irreducible
representations of ψ; every solver takes this matrix as it takes a constant-depth one
(:meth:`MetricRoot.apply`). M has few eigenvalues that are not zero to rounding (about
K_max R_0/π per atom), so S^{−1/2} = 1 + U diag(d) U† with U the (n, r) eigenvectors of M of
|μ| > :data:`RANK_FLOOR` · max|μ| and d = (1 − μ)^{−1/2} − 1, found from a factored M
(:meth:`NonlocalTerm.metric_root`), and the product costs O(n² r).
With s = 0 the key is ignored and the model is the constant-depth one, bit for bit.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy.special import eval_legendre, spherical_jn

from ..errors import InputError
from ..input.material import Material

#: |K − K′| (Å⁻¹) below which F_l comes from the diagonal form and a second-order correction
#: (:func:`radial_overlap`): the Lommel quotient loses digits as K′ → K.
CLOSE_INVA = 5e-4

#: |K² − K′²| (Å⁻²) below which the same holds (both K and K′ near 0).
CLOSE_SQUARES_INVA2 = 1e-5

#: |K − K′| (Å⁻¹) below which two plane waves count as equally long (symmetry partners whose
#: lengths differ by rounding only).
EQUAL_INVA = 1e-9

#: Eigenvalues μ of M with |μ| at most this fraction of the largest are left out of
#: S^{−1/2} = 1 + U diag(d) U† (module docstring): their d is below 1e-13 of the kept ones'.
RANK_FLOOR = 1e-14

#: Smallest accepted eigenvalue of the metric S = 1 − M (a positive energy slope with
#: overlapping wells can make S singular; the eigenproblem then has no meaning).
METRIC_FLOOR = 0.05

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
        Per species, ((l, A_l in eV, R_l in Å), …); for an energy-dependent l = 0 depth,
        its constant part A_0.
    atom_volume_A3 : float
        Ω_atom.
    energy_slopes : tuple of float
        Per species, s of A_0(E) = A_0 + s E (module docstring); () or all 0: constant depths.
    atom_species, positions_A : tuple
        Per atom, its index in ``species`` and its Cartesian position (Å): the factored
        metric of an energy-dependent well (:meth:`metric_root`) needs the atoms themselves.
    """

    species: tuple[str, ...]
    channels: tuple[tuple[tuple[int, float, float], ...], ...]
    atom_volume_A3: float
    energy_slopes: tuple[float, ...] = ()
    atom_species: tuple[int, ...] = ()
    positions_A: tuple[tuple[float, float, float], ...] = ()

    @property
    def energy_dependent(self) -> bool:
        """True when some l = 0 depth follows the state's energy."""
        return any(s != 0.0 for s in self.energy_slopes)

    def orthogonalised(self, h: np.ndarray, kg_cart_invA: np.ndarray) -> np.ndarray:
        """S^{−1/2} H_c S^{−1/2} of a whole H_c (spinless or spinor) on the plane waves K = k + G;
        H_c itself for constant depths. Every builder of a full H(k) ends with this."""
        if not self.energy_dependent:
            return h
        return self.metric_root(kg_cart_invA).apply(h)

    def metric_root(self, kg_cart_invA: np.ndarray) -> MetricRoot | None:
        """S^{−1/2} of the metric S = 1 − M on the plane waves K = k + G (module docstring).

        M is gathered in factored form, M = Φ D Φ†, from Gauss–Legendre quadrature of F_0,

            F_0(K, K′) = Σ_q w_q r_q² j_0(K r_q) j_0(K′ r_q),
            Φ_{i,(a,q)} = e^{−iK_i·τ_a} r_q √w_q j_0(K_i r_q),   D_(a,q) = (4π/Ω) s_a

        (a over the atoms of species with a slope, at τ_a; e^{−i(G − G′)·τ} = e^{−iK·τ}
        e^{iK′·τ}), with :func:`quadrature_order` nodes, so that a thin QR of Φ and the
        eigenvalues of the small R D R† give M's eigenpairs in O(n m²), m the number of
        columns, instead of a dense eigendecomposition of M. None for constant depths.

        Raises
        ------
        InputError
            Naming the slope's key, where S is not safely positive definite (a positive slope
            with overlapping wells).
        """
        if not self.energy_dependent:
            return None
        kg = np.asarray(kg_cart_invA, dtype=float)
        k = np.linalg.norm(kg, axis=1)
        scale = 4.0 * np.pi / (self.atom_volume_A3 * len(self.positions_A))
        radial: dict[int, np.ndarray] = {}  # r_q √w_q j_0(K r_q), once per species
        columns, weights = [], []
        for s, position in zip(self.atom_species, self.positions_A, strict=True):
            slope = self.energy_slopes[s]
            if slope == 0.0:
                continue
            if s not in radial:
                radius = next(r for ell, _, r in self.channels[s] if ell == 0)
                x, w = _gauss_legendre(quadrature_order(float(k.max()), radius))
                r, w = 0.5 * radius * (x + 1.0), 0.5 * radius * w
                radial[s] = (r * np.sqrt(w))[None, :] * np.sinc(k[:, None] * r[None, :] / np.pi)
            phase = np.exp(-1j * (kg @ np.asarray(position)))
            columns.append(phase[:, None] * radial[s])
            weights.append(np.full(radial[s].shape[1], scale * slope))
        q, upper = np.linalg.qr(np.hstack(columns))
        d = np.concatenate(weights)
        mu, v = np.linalg.eigh(upper @ (d[:, None] * upper.conj().T))
        lowest = 1.0 - float(mu[-1])
        if lowest < METRIC_FLOOR:
            species = next(sp for sp, slope in zip(self.species, self.energy_slopes, strict=True)
                           if slope > 0)
            raise InputError(f"makes the metric 1 − s·P_0 of the energy-dependent well nearly "
                             f"singular (smallest eigenvalue {lowest:.3g}, wells overlapping); "
                             f"expected a smaller positive slope, a smaller R0_A, or a slope ≤ 0",
                             key=f"nonlocal.species.{species}.A0_energy_slope")
        keep = np.abs(mu) > RANK_FLOOR * max(float(np.max(np.abs(mu))), 1e-300)
        return MetricRoot(q @ v[:, keep], 1.0 / np.sqrt(1.0 - mu[keep]) - 1.0)

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


@dataclass(frozen=True)
class MetricRoot:
    """S^{−1/2} = 1 + U diag(d) U† of an energy-dependent well's metric on one set of plane
    waves (:meth:`NonlocalTerm.metric_root`).

    Attributes
    ----------
    vectors : numpy.ndarray
        (n, r) U, orthonormal columns.
    shifts : numpy.ndarray
        (r,) d = (1 − μ)^{−1/2} − 1.
    """

    vectors: np.ndarray
    shifts: np.ndarray

    def apply(self, h: np.ndarray) -> np.ndarray:
        """S^{−1/2} H_c S^{−1/2} for an (n, n) or spinor (2n, 2n) Hermitian H_c (spin index
        slowest; the metric is 1₂ ⊗ S there).

        With X = S^{−1/2} − 1 = U D U†, (1 + X) H_c (1 + X) = H_c + U Z + (U Z)†, Z = D U† H_c
        + ½ (D U† H_c U D) U†, with U acting on each spin block alike (H_c viewed as
        (c, n, c, n) blocks): 8 r n² complex multiply-adds for a spinor H_c, r the kept rank.
        """
        u, d = self.vectors, self.shifts
        n, r = u.shape
        c = h.shape[0] // n
        uh = u.conj().T
        blocks = h.reshape(c, n, c, n)
        t = np.tensordot(uh, blocks, axes=([1], [1])) * d[:, None, None, None]  # (r, c, c, n)
        core = (t @ u) * (0.5 * d)                                              # (r, c, c, r)
        z = t + core @ uh                                                       # (r, c, c, n)
        y = np.tensordot(u, z, axes=([1], [0])).transpose(1, 0, 2, 3).reshape(c * n, c * n)
        out = h + y
        out += y.conj().T
        return out


def nonlocal_term(material: Material) -> NonlocalTerm | None:
    """The :class:`NonlocalTerm` of a material, None without a ``nonlocal`` table."""
    nl = material.nonlocal_terms
    if nl is None:
        return None
    species = tuple(sorted({a.species for a in material.atoms}))
    slopes = tuple(nl.energy_slopes.get(s, 0.0) for s in species)
    return NonlocalTerm(species=species,
                        channels=tuple(nl.species.get(s, ()) for s in species),
                        atom_volume_A3=material.volume_A / len(material.atoms),
                        energy_slopes=slopes if any(slopes) else (),
                        atom_species=tuple(species.index(a.species) for a in material.atoms),
                        positions_A=tuple(tuple(float(x) for x in r)
                                          for r in material.positions_cart_A))


@functools.lru_cache(maxsize=64)
def _gauss_legendre(order: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights on [−1, 1] (:func:`numpy.polynomial.legendre.leggauss`,
    which finds the nodes by Newton steps: kept per order, not recomputed per k)."""
    return np.polynomial.legendre.leggauss(order)


def quadrature_order(k_max_invA: float, radius_A: float) -> int:
    """Gauss–Legendre nodes for F_0(K, K′) on [0, R] with K, K′ ≤ K_max: the integrand is
    entire and oscillates at most like sin(2 K_max r), and the rule of n nodes is exact to
    degree 2n − 1, so n = K_max R + 16 leaves an error below 1e-14 of F_0 (tested against
    the closed form for K_max R up to 50)."""
    return int(np.ceil(k_max_invA * radius_A)) + 16
