r"""Strain in the k·p models: strain tensors and the Bir–Pikus Hamiltonian.

Strain tensors (symmetric 3 × 3, cubic axes, dimensionless):

* :func:`hydrostatic_strain`: ε_ij = e δ_ij;
* :func:`pseudomorphic_strain`: a layer of lattice constant a grown coherently on a substrate
  of lattice constant a_s along a growth direction n̂: in the growth plane the layer takes the
  substrate's spacing, ε∥ = a_s/a − 1 in every in-plane direction; along n̂ it relaxes freely,
  so the traction on the growth plane vanishes, σ·n̂ = 0. With ε = ε∥ (1 − n̂n̂) + n̂u + un̂ −
  (n̂·u) n̂n̂ the three components of u = ε n̂ follow from σ_ij n_j = C_ijkl ε_kl n_j = 0, a 3 × 3
  linear system with the cubic stiffness tensor C (c11, c12, c44). For [001] this gives
  ε_zz = −2 (c12/c11) ε∥; for [111], in cubic axes, ε_xx = ε_yy = ε_zz = (2ε∥ + ε⊥)/3 and
  ε_xy = ε_yz = ε_zx = (ε⊥ − ε∥)/3 with ε⊥ = −2 (c11 + 2c12 − 2c44)/(c11 + 2c12 + 4c44) ε∥
  (Chuang, *Physics of Optoelectronic Devices*, Wiley 1995, ch. 4; from memory; the tests
  check both).

The Bir–Pikus Hamiltonian (Bir & Pikus, *Symmetry and Strain-Induced Effects in
Semiconductors*, Wiley 1974) is built like the k² terms of :mod:`bandpert.kp.hamiltonians`: on
the spinless p triplet (X, Y, Z),

    D_{X_i X_i} = l ε_ii + m (tr ε − ε_ii),   D_{X_i X_j} = n ε_ij  (i ≠ j),

with l = a_v + 2b, m = a_v − b, n = √3 d (so a_v = (l + 2m)/3, b = (l − m)/3, d = n/√3,
CONVENTIONS.md), times the unit matrix in spin, plus a_c tr ε on |S⟩; then rotated to the J
basis. There it has the Luttinger–Kohn form with P_ε = −a_v tr ε, Q_ε = −(b/2)(ε_xx + ε_yy −
2ε_zz), R_ε = (√3/2) b (ε_xx − ε_yy) − i d ε_xy, S_ε = −d (ε_xz − i ε_yz) in place of P_k,
Q_k, R_k, S_k, including the Γ8–Γ7 coupling (the sign convention of a_v:
:mod:`bandpert.input.kp_parameters`). Energies stay measured from the unstrained valence-band
top. At Γ for [001] biaxial strain: HH at −P_ε − Q_ε, LH and SO at −P_ε + ½[Q_ε − Δ ±
√(Δ² + 2ΔQ_ε + 9Q_ε²)] (Chuang 1995, ch. 4).

Left out: the strain-induced k-linear terms and the strain dependence of the conduction–valence
coupling P (both of higher order in the usual device range, |ε| ≲ 2 %), and the piezoelectric
field of a strained layer grown along [111] or [110] (:func:`piezoelectric_note`).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..input.kp_parameters import DeformationPotentials, ElasticConstants
from .hamiltonians import KPModel, cartesian_basis_matrix
from .parameters import unit_vector

__all__ = [
    "GROWTH_DIRECTIONS",
    "bir_pikus_cartesian",
    "check_strain",
    "hydrostatic_strain",
    "piezoelectric_note",
    "pseudomorphic_strain",
    "stiffness_tensor",
    "strained_model",
]

#: Growth directions with a name (any direction works in :func:`pseudomorphic_strain`).
GROWTH_DIRECTIONS: tuple[str, ...] = ("001", "110", "111")

#: Largest |ε_ij| accepted: beyond ~10 % a layer is not coherent and linear elasticity and
#: first-order deformation potentials are out of their depth.
MAX_STRAIN = 0.1

FloatArray = NDArray[np.float64]


def check_strain(strain: ArrayLike) -> FloatArray:
    """A strain tensor as a symmetric (3, 3) float array, or ValueError naming the problem."""
    eps = np.asarray(strain, dtype=float)
    if eps.shape != (3, 3) or not np.all(np.isfinite(eps)):
        raise ValueError(f"strain must be a finite 3 × 3 tensor, got shape {eps.shape}")
    if not np.allclose(eps, eps.T, rtol=0.0, atol=1e-12):
        raise ValueError("strain must be a symmetric tensor (ε_ij = ε_ji)")
    if np.abs(eps).max() > MAX_STRAIN:
        raise ValueError(f"strain component {np.abs(eps).max():.3g} exceeds {MAX_STRAIN:g}; "
                         "expected a coherent layer's strain (a few per cent)")
    return 0.5 * (eps + eps.T)


def hydrostatic_strain(e: float) -> FloatArray:
    """ε_ij = e δ_ij (tr ε = 3e = ΔV/V to first order)."""
    return check_strain(e * np.eye(3))


def stiffness_tensor(elastic: ElasticConstants) -> FloatArray:
    """The cubic stiffness tensor C_ijkl (GPa) of c11, c12, c44.

    C_ijkl = c12 δ_ij δ_kl + c44 (δ_ik δ_jl + δ_il δ_jk) + (c11 − c12 − 2c44) Σ_a δ_ia δ_ja δ_ka
    δ_la (Nye, *Physical Properties of Crystals*, 1957; common practice).
    """
    d = np.eye(3)
    c = (elastic.c12_GPa * np.einsum("ij,kl->ijkl", d, d)
         + elastic.c44_GPa * (np.einsum("ik,jl->ijkl", d, d) + np.einsum("il,jk->ijkl", d, d)))
    aniso = np.zeros((3, 3, 3, 3))
    for a in range(3):
        aniso[a, a, a, a] = 1.0
    return c + (elastic.c11_GPa - elastic.c12_GPa - 2.0 * elastic.c44_GPa) * aniso


def pseudomorphic_strain(layer_a_A: float, substrate_a_A: float, elastic: ElasticConstants,
                         growth: ArrayLike | str = "001") -> FloatArray:
    """Strain of a layer grown coherently on a substrate along ``growth`` (module docstring).

    Parameters
    ----------
    layer_a_A, substrate_a_A : float
        Cubic lattice constants of the free layer and of the substrate, Å.
    elastic : ElasticConstants
        The layer's elastic constants.
    growth : str or array_like
        Growth direction ("001", "110", "111", or three numbers).

    Returns
    -------
    ndarray, shape (3, 3)
        ε in cubic axes; negative ε∥ (compression) when the substrate is smaller.
    """
    if not (layer_a_A > 0 and substrate_a_A > 0):
        raise ValueError("lattice constants must be positive")
    n = unit_vector(growth)
    e_par = substrate_a_A / layer_a_A - 1.0
    c = stiffness_tensor(elastic)
    proj = np.eye(3) - np.outer(n, n)
    base = e_par * proj
    # ε(u) = base + n u + u n − (n·u) n n is linear in u: σ(ε)·n = 0 for u
    cols = []
    for k in range(3):
        unit = np.zeros(3)
        unit[k] = 1.0
        de = np.outer(n, unit) + np.outer(unit, n) - n[k] * np.outer(n, n)
        cols.append(np.einsum("ijkl,kl,j->i", c, de, n))
    rhs = -np.einsum("ijkl,kl,j->i", c, base, n)
    u = np.linalg.solve(np.array(cols).T, rhs)
    eps = base + np.outer(n, u) + np.outer(u, n) - (n @ u) * np.outer(n, n)
    return check_strain(eps)


def piezoelectric_note(strain: ArrayLike) -> str:
    """A warning text when the strain has shear components (growth off [001]): a zincblende
    layer then carries a piezoelectric polarisation P_i = 2 e14 ε_jk (Smith, Phys. Rev. Lett.
    58, 1264 (1987); from memory), whose field these models leave out; "" otherwise."""
    eps = check_strain(strain)
    shear = max(abs(eps[0, 1]), abs(eps[1, 2]), abs(eps[0, 2]))
    if shear < 1e-12:
        return ""
    return (f"the strain has shear components (largest |ε_ij| = {shear:.3g}, as for growth "
            "along [111] or [110]); a zincblende layer then carries a piezoelectric "
            "polarisation whose electric field is not modelled here")


def bir_pikus_cartesian(strain: ArrayLike, deformation: DeformationPotentials,
                        with_conduction: bool) -> NDArray:
    """The Bir–Pikus matrix on the Cartesian basis of a model (module docstring).

    Returns an (8, 8) matrix on (S↑, S↓, X↑, X↓, Y↑, Y↓, Z↑, Z↓) when ``with_conduction``,
    else (6, 6) on (X↑, …, Z↓); rotate with
    :func:`~bandpert.kp.hamiltonians.cartesian_basis_matrix`.
    """
    eps = check_strain(strain)
    av, b, d = deformation.a_v_eV, deformation.b_eV, deformation.d_eV
    big_l, big_m, big_n = av + 2.0 * b, av - b, math.sqrt(3.0) * d
    tr = float(np.trace(eps))
    orbital = np.where(np.eye(3, dtype=bool), 0.0, big_n * eps)
    orbital[np.diag_indices(3)] = big_l * np.diag(eps) + big_m * (tr - np.diag(eps))
    p_block = np.kron(orbital, np.eye(2)).astype(complex)
    if not with_conduction:
        return p_block
    out = np.zeros((8, 8), dtype=complex)
    out[0, 0] = out[1, 1] = deformation.a_c_eV * tr
    out[2:, 2:] = p_block
    return out


def _angular_momentum_cartesian(with_conduction: bool) -> NDArray:
    """J = L + σ/2 on the Cartesian basis (3, n, n); L_k = −i ε_kab on the p orbitals, 0 on S."""
    eps = np.zeros((3, 3, 3))
    for i, j, k in ((0, 1, 2), (1, 2, 0), (2, 0, 1)):
        eps[i, j, k], eps[i, k, j] = 1.0, -1.0
    pauli = np.array([[[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]])
    p = np.array([np.kron(-1j * eps[k], np.eye(2)) + np.kron(np.eye(3), pauli[k] / 2)
                  for k in range(3)])
    if not with_conduction:
        return p
    out = np.zeros((3, 8, 8), dtype=complex)
    out[:, :2, :2] = pauli / 2
    out[:, 2:, 2:] = p
    return out


def strained_model(model: KPModel, strain: ArrayLike, deformation: DeformationPotentials,
                   axis: ArrayLike | str = "001") -> KPModel:
    """The six- or eight-band ``model`` under a homogeneous strain (module docstring).

    H(k) = H_model(k) + D(ε), D the Bir–Pikus matrix. The result is expressed on the eigenstates
    of H(0), so that its ``h0_eV`` is diagonal (the band-edge analysis of
    :mod:`bandpert.kp.analysis` works unchanged); inside a degenerate level the states are
    chosen with definite |m_J| along ``axis`` (the growth direction). Band names follow the
    states' character at Γ: "conduction" (mostly |S⟩), "split-off" (mostly J = 1/2), "heavy
    hole" (mostly |m_J| = 3/2 along ``axis``), "light hole" (the rest), so under tension the
    light hole may be the top band.

    Raises
    ------
    ValueError
        For the two-band model (no Γ8 structure) or a malformed strain.
    """
    if model.name not in ("six-band", "eight-band"):
        raise ValueError(f"strain needs the six- or eight-band model, not the {model.name} one")
    eight = model.name == "eight-band"
    u = cartesian_basis_matrix(model.name)
    uh = u.conj().T
    h = model.h0_eV + uh @ bir_pikus_cartesian(strain, deformation, eight) @ u
    h = 0.5 * (h + h.conj().T)
    n = unit_vector(axis)
    j_n = uh @ np.tensordot(n, _angular_momentum_cartesian(eight), axes=(0, 0)) @ u
    heavy = 0.5 * (j_n @ j_n - 0.25 * np.eye(model.size))  # 1 on |m| = 3/2, 0 on |m| = 1/2
    energies, vectors = np.linalg.eigh(h)
    start = 0
    while start < len(energies):  # definite |m| inside each degenerate level
        stop = start + 1
        while stop < len(energies) and energies[stop] - energies[start] < 1e-9:
            stop += 1
        block = vectors[:, start:stop]
        _, w = np.linalg.eigh(block.conj().T @ heavy @ block)
        vectors[:, start:stop] = block @ w
        start = stop
    labels = np.array(model.basis_labels)
    weight = np.abs(vectors) ** 2
    so = weight[np.char.startswith(labels, "Γ7")].sum(axis=0)
    cond = weight[np.char.startswith(labels, "Γ6")].sum(axis=0)
    hh = np.real(np.einsum("ia,ij,ja->a", vectors.conj(), heavy, vectors))
    lh = 1.0 - so - cond - hh
    kinds = ("conduction", "split-off", "heavy hole", "light hole")
    names = tuple(kinds[i] for i in np.argmax(np.stack([cond, so, hh, lh]), axis=0))
    vh = vectors.conj().T
    return replace(
        model, basis_labels=tuple(f"strained Γ state {i} ({nm})" for i, nm in enumerate(names)),
        band_names=names, h0_eV=np.diag(energies).astype(complex),
        linear_eV_A=vh @ model.linear_eV_A @ vectors,
        quadratic_eV_A2=vh @ model.quadratic_eV_A2 @ vectors, strain=check_strain(strain))
