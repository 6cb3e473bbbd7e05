"""Effective masses from second-order k·p theory on plane-wave eigenstates.

With H(k) = C|k+G|² δ_{GG'} + V(G−G'), C = ħ²/2m0, the velocity operator is
∂H/∂k_i = 2C (k+G)_i, so the momentum matrix elements between eigenstates at k0 are

    p_nm / ħ = π_nm = Σ_G c_n*(G) c_m(G) (k0 + G)            (Å⁻¹)

and second-order perturbation theory in q = k − k0 gives (Kittel, *Quantum Theory of Solids*,
1963, ch. 9; Yu & Cardona, *Fundamentals of Semiconductors*, 2010, §2.6)

    (m0/m*)_ij = δ_ij + (2/m0) Σ_{l≠n} Re(p^i_nl p^j_ln)/(E_n − E_l)
               = δ_ij + 4C Σ_{l≠n} Re(π^i_nl π^j_ln)/(E_n − E_l).

With the kinetic term β C|k+G|² of a scaled kinetic energy (``potential.kinetic_factor``;
Wang & Zunger, Phys. Rev. B 51, 17398 (1995), from memory) the velocity is 2βC(k+G): π carries
β and the free term δ_ij becomes β δ_ij.

With every basis state kept in the sum this is the exact curvature of the finite-basis band.
This module holds the eigenstates at k0, the sum-over-states tensor, its principal masses and
axes, and its two checks (finite differences of the exact band, convergence with the states
kept); degenerate edges are in :mod:`bandpert.physics.degenerate_edge`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..errors import InputError
from ..planewave.model import PlaneWaveModel
from ..planewave.solver import exact_energies
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²

#: Energies closer than this (eV) count as one degenerate level at k0.
DEGENERACY_TOL_EV = 1e-5

@dataclass(frozen=True)
class Eigenstates:
    """All eigenstates of H(k0) and the momentum matrices between them.

    Attributes
    ----------
    k0_cart_invA : numpy.ndarray
        (d,) the expansion point.
    energies_eV : numpy.ndarray
        (n,) eigenvalues, ascending.
    vectors : numpy.ndarray
        (n_G, n) eigenvectors as columns.
    momentum_invA : numpy.ndarray
        (d, n, n) π^i_nm = β p^i_nm/ħ in Å⁻¹, so that ⟨n|∂H/∂k_i|m⟩ = 2C π^i_nm (β the model's
        kinetic factor, 1 for the free-electron mass).
    kinetic_factor : float
        β: the free-electron term of the curvature is 2βC.
    """

    k0_cart_invA: np.ndarray
    energies_eV: np.ndarray
    vectors: np.ndarray
    momentum_invA: np.ndarray
    kinetic_factor: float = 1.0


def eigenstates(model: PlaneWaveModel, k0_cart_invA: np.ndarray,
                n_states: int | None = None) -> Eigenstates:
    """Eigenstates of H(k0) and their momentum matrix elements.

    π^i_nm = β Σ_G c_n*(G) c_m(G) (k0 + G)_i, computed as C† diag(k0+G)_i C for all i at once
    (β the kinetic factor of H0 = β C|k+G|²).

    Parameters
    ----------
    model : PlaneWaveModel
    k0_cart_invA : numpy.ndarray
        (d,) Cartesian expansion point (Å⁻¹).
    n_states : int, optional
        Keep only the lowest ``n_states`` (default: the whole basis).

    Returns
    -------
    Eigenstates
    """
    if model.n_components != 1:
        raise InputError("the sum over states here is spinless and the model has spin-orbit "
                         "coupling; expected a material without a spin_orbit table",
                         key="spin_orbit")
    if model.nonlocal_term is not None:  # π = β⟨k + G⟩ lacks ∂V_NL/∂k
        raise InputError("the sum over states here uses the velocity of a local potential and "
                         "the model has nonlocal wells; expected a material without a nonlocal "
                         "table", key="nonlocal")
    k0 = np.asarray(k0_cart_invA, dtype=float)
    n = model.size if n_states is None else min(n_states, model.size)
    h = model.hamiltonian(k0)
    if n < model.size:
        w, c = scipy.linalg.eigh(h, subset_by_index=(0, n - 1), driver="evr", check_finite=False)
    else:
        w, c = scipy.linalg.eigh(h, driver="evd", check_finite=False)
    kg = k0[None, :] + model.basis.g_cart_invA  # (n_G, d)
    beta = model.kinetic_factor
    pi = beta * np.einsum("gn,gi,gm->inm", c.conj(), kg, c, optimize=True)
    return Eigenstates(k0_cart_invA=k0, energies_eV=w, vectors=c, momentum_invA=pi,
                       kinetic_factor=beta)


def degenerate_set(states: Eigenstates, band: int, tol_eV: float = DEGENERACY_TOL_EV) -> np.ndarray:
    """Indices of the levels degenerate with ``band`` at k0 (``band`` included)."""
    e = states.energies_eV
    return np.flatnonzero(np.abs(e - e[band]) <= tol_eV)


def inverse_mass_tensor(states: Eigenstates, band: int, n_sum: int | None = None,
                        check: bool = True) -> np.ndarray:
    """(m0/m*)_ij of a non-degenerate band by the sum over states.

    (m0/m*)_ij = β δ_ij + 4C Σ_{l≠n} Re(π^i_nl π^j_ln)/(E_n − E_l), C = ħ²/2m0 (module
    docstring; β the kinetic factor, carried in π).

    Parameters
    ----------
    states : Eigenstates
    band : int
        The band n (index into ``states.energies_eV``).
    n_sum : int, optional
        Keep only the lowest ``n_sum`` states in the sum (convergence studies).
    check : bool
        Refuse a band within :data:`DEGENERACY_TOL_EV` of another (default); off when the
        caller has judged the degeneracy against the basis already.

    Returns
    -------
    numpy.ndarray
        (d, d) symmetric inverse effective-mass tensor in units of 1/m0.
    """
    group = degenerate_set(states, band)
    if check and group.size > 1:
        raise InputError(f"band {band + 1} is degenerate with band(s) "
                         f"{', '.join(str(g + 1) for g in group if g != band)} at this k; use "
                         "the degenerate-edge treatment", key="band")
    e = states.energies_eV
    n = len(e) if n_sum is None else min(n_sum, len(e))
    others = np.array([i for i in range(n) if i != band])
    pi_n = states.momentum_invA[:, band, others]  # (d, L): π^i_nl
    weight = 1.0 / (e[band] - e[others])
    tensor = np.einsum("il,jl,l->ij", pi_n, pi_n.conj(), weight).real
    d = tensor.shape[0]
    return states.kinetic_factor * np.eye(d) + 4.0 * C * 0.5 * (tensor + tensor.T)


@dataclass(frozen=True)
class MassTensor:
    """A band's inverse effective-mass tensor and its principal values.

    Attributes
    ----------
    inverse_mass : numpy.ndarray
        (d, d) (m0/m*)_ij; its sign is the curvature's (negative at a maximum).
    principal_masses : numpy.ndarray
        (d,) masses along the principal axes in m0, reported positive (|1/eigenvalue|).
    principal_axes : numpy.ndarray
        (d, d) unit axes as columns, in Cartesian coordinates.
    curvature_sign : numpy.ndarray
        (d,) +1 where the band curves up (electron-like), −1 where it curves down.
    """

    inverse_mass: np.ndarray
    principal_masses: np.ndarray
    principal_axes: np.ndarray
    curvature_sign: np.ndarray

    @property
    def distinct(self) -> tuple[PrincipalValue, ...]:
        """The distinct principal inverse masses (signed m0/m*), with axes only where the
        tensor fixes them (:func:`distinct_principal`)."""
        with np.errstate(divide="ignore"):
            inverse = self.curvature_sign / self.principal_masses
        return distinct_principal(inverse, self.principal_axes)

    @property
    def anisotropy(self) -> str:
        """"isotropic", "uniaxial" (3D, two principal masses equal) or "anisotropic"."""
        n = len(self.distinct)
        if n == 1:
            return "isotropic"
        return "uniaxial" if n == 2 and len(self.principal_masses) == 3 else "anisotropic"


#: Principal inverse masses equal to this relative tolerance are one (repeated) value: their
#: axes are not fixed by the tensor and are not reported.
ISOTROPY_RTOL = 1e-4


@dataclass(frozen=True)
class PrincipalValue:
    """One distinct principal value of a symmetric tensor and the direction it belongs to.

    Attributes
    ----------
    value : float
        The principal value (for masses: the signed m0/m*).
    multiplicity : int
        How many principal values coincide with it (within :data:`ISOTROPY_RTOL`).
    axis : numpy.ndarray or None
        (d,) Cartesian unit axis when the value is single and the tensor is not isotropic, with
        its largest component positive; None where the direction is not fixed.
    normal : numpy.ndarray or None
        For a repeated value of a uniaxial 3D tensor, the single axis: the value holds for every
        direction perpendicular to it.
    """

    value: float
    multiplicity: int
    axis: np.ndarray | None
    normal: np.ndarray | None


def canonical_axis(v: np.ndarray) -> np.ndarray:
    """A unit axis with its sign fixed (largest component positive) and rounding noise below
    1e-12 set to zero, so the same axis always prints the same way."""
    v = np.asarray(v, dtype=float)
    v = np.where(np.abs(v) < 1e-12, 0.0, v)
    v = v / np.linalg.norm(v)
    return (v if v[np.argmax(np.abs(v))] > 0 else -v) + 0.0


def distinct_principal(values: np.ndarray, axes: np.ndarray,
                       rtol: float = ISOTROPY_RTOL) -> tuple[PrincipalValue, ...]:
    """Group the principal values of a symmetric tensor into distinct ones, with their axes
    only where the tensor fixes them.

    Isotropic (every value equal): one value, no axis. Uniaxial (3D, one value twice): the
    single value with its axis, the repeated one with that axis as the normal of its plane.
    Otherwise each value with its axis. Two values are equal when they differ by less than
    ``rtol`` times the largest magnitude.

    Parameters
    ----------
    values : numpy.ndarray
        (d,) principal values.
    axes : numpy.ndarray
        (d, d) unit axes as columns.
    """
    values = np.asarray(values, dtype=float)
    scale = max(float(np.abs(values).max()), 1e-300)
    order = np.argsort(values)
    groups: list[list[int]] = []
    for i in order:
        if groups and abs(values[i] - values[groups[-1][-1]]) <= rtol * scale:
            groups[-1].append(int(i))
        else:
            groups.append([int(i)])
    if len(groups) == 1:
        return (PrincipalValue(float(values.mean()), len(values), None, None),)
    single = [g for g in groups if len(g) == 1]
    out = []
    for g in groups:
        value = float(values[g].mean())
        if len(g) == 1:
            out.append(PrincipalValue(value, 1, canonical_axis(axes[:, g[0]]), None))
        else:
            normal = (canonical_axis(axes[:, single[0][0]])
                      if len(single) == 1 and len(values) == 3 else None)
            out.append(PrincipalValue(value, len(g), None, normal))
    return tuple(out)


def principal(inverse_mass: np.ndarray) -> MassTensor:
    """Principal masses and axes of an inverse-mass tensor (eigen-decomposition)."""
    w, u = np.linalg.eigh(0.5 * (inverse_mass + inverse_mass.T))
    with np.errstate(divide="ignore"):
        masses = np.abs(1.0 / w)
    return MassTensor(inverse_mass=inverse_mass, principal_masses=masses, principal_axes=u,
                      curvature_sign=np.sign(w))


def finite_difference_inverse_mass(model: PlaneWaveModel, k0_cart_invA: np.ndarray, band: int,
                                   step_invA: float = 0.0025) -> np.ndarray:
    """(m0/m*)_ij from exact bands by finite differences.

    Second derivatives along the axes and along the face diagonals e_i + e_j with the
    fourth-order five-point stencil f'' ≈ [−f(2h) + 16f(h) − 30f(0) + 16f(−h) − f(−2h)]/(12h²)
    (truncation O(h⁴); Abramowitz & Stegun 1964, eq. 25.3.24); the mixed derivatives follow
    from D_uu = (D_ii + D_jj + 2D_ij)/2 for u = (e_i + e_j)/√2. Then (m0/m*) = D/(2C).

    Parameters
    ----------
    model : PlaneWaveModel
    k0_cart_invA : numpy.ndarray
        (d,) expansion point.
    band : int
        Band index (0-based, sorted at each k).
    step_invA : float
        Step h in Å⁻¹ (default 0.0025: the O(h⁴) truncation is 4e-8 relative for silicon's
        conduction valley, rounding of ~1e-12 eV in the eigenvalues about 1e-8).

    Returns
    -------
    numpy.ndarray
        (d, d) inverse effective-mass tensor.
    """
    k0 = np.asarray(k0_cart_invA, dtype=float)
    d = k0.size
    dirs = [np.eye(d)[i] for i in range(d)]
    pairs = [(i, j) for i in range(d) for j in range(i + 1, d)]
    dirs += [(np.eye(d)[i] + np.eye(d)[j]) / np.sqrt(2.0) for i, j in pairs]
    offsets = np.array([-2, -1, 1, 2]) * step_invA
    points = [k0] + [k0 + o * u for u in dirs for o in offsets]
    e = exact_energies(model, np.array(points), band + 1)[:, band]
    f0, rest = e[0], e[1:].reshape(len(dirs), 4)
    second = (-rest[:, 0] + 16 * rest[:, 1] - 30 * f0 + 16 * rest[:, 2] - rest[:, 3]) / (
        12 * step_invA**2)
    hess = np.zeros((d, d))
    hess[np.arange(d), np.arange(d)] = second[:d]
    for (i, j), duu in zip(pairs, second[d:], strict=True):
        hess[i, j] = hess[j, i] = duu - 0.5 * (second[i] + second[j])
    return hess / (2.0 * C)


def sum_convergence(states: Eigenstates, band: int, counts: tuple[int, ...] = (8, 16, 32, 64, 128)
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Principal masses of a non-degenerate band against the number of states in the sum.

    Returns
    -------
    counts : numpy.ndarray
        The numbers of states kept (the whole basis last).
    masses : numpy.ndarray
        (len(counts), d) principal masses (m0), sorted ascending.
    """
    n = len(states.energies_eV)
    kept = np.array(sorted({c for c in counts if band < c < n} | {n}))
    masses = np.array([np.sort(principal(inverse_mass_tensor(states, band, c)).principal_masses)
                       for c in kept])
    return kept, masses
