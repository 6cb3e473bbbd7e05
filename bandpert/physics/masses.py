"""Effective masses from second-order k·p theory on plane-wave eigenstates.

With H(k) = C|k+G|² δ_{GG'} + V(G−G'), C = ħ²/2m0, the velocity operator is
∂H/∂k_i = 2C (k+G)_i, so the momentum matrix elements between eigenstates at k0 are

    p_nm / ħ = π_nm = Σ_G c_n*(G) c_m(G) (k0 + G)            (Å⁻¹)

and second-order perturbation theory in q = k − k0 gives (Kittel, *Quantum Theory of Solids*,
1963, ch. 9; Yu & Cardona, *Fundamentals of Semiconductors*, 2010, §2.6)

    (m0/m*)_ij = δ_ij + (2/m0) Σ_{l≠n} Re(p^i_nl p^j_ln)/(E_n − E_l)
               = δ_ij + 4C Σ_{l≠n} Re(π^i_nl π^j_ln)/(E_n − E_l).

With every basis state kept in the sum this is the exact curvature of the finite-basis band.
At a degenerate edge the second-order Löwdin effective Hamiltonian in q (from
:mod:`bandpert.perturbation`) replaces the scalar formula; for the spinless cubic valence
triplet it is the Dresselhaus–Kip–Kittel form with parameters L, M, N (Dresselhaus, Kip &
Kittel, Phys. Rev. 98, 368 (1955)) in units of ħ²/2m0, free-electron term included.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..crystal.lattice import point_group_rotations
from ..errors import InputError
from ..input.material import Material
from ..kp.parameters import luttinger_from_dkk
from ..perturbation import lowdin_effective_hamiltonian
from ..physics.critical_points import CriticalPoint, classify
from ..physics.extrema import (
    EdgeLocation,
    conductivity_mass,
    density_of_states_mass,
    effective_density_of_states_cm3,
    locate_edges,
    star_size,
)
from ..planewave.model import PlaneWaveModel
from ..planewave.solver import exact_energies, single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²

#: Energies closer than this (eV) count as one degenerate level at k0.
DEGENERACY_TOL_EV = 1e-5

#: Directions of the cubic warping analysis.
CUBIC_DIRECTIONS = {"[100]": (1.0, 0.0, 0.0), "[110]": (1.0, 1.0, 0.0), "[111]": (1.0, 1.0, 1.0)}


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
        (d, n, n) π^i_nm = p^i_nm/ħ in Å⁻¹.
    """

    k0_cart_invA: np.ndarray
    energies_eV: np.ndarray
    vectors: np.ndarray
    momentum_invA: np.ndarray


def eigenstates(model: PlaneWaveModel, k0_cart_invA: np.ndarray,
                n_states: int | None = None) -> Eigenstates:
    """Eigenstates of H(k0) and their momentum matrix elements.

    π^i_nm = Σ_G c_n*(G) c_m(G) (k0 + G)_i, computed as C† diag(k0+G)_i C for all i at once.

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
    k0 = np.asarray(k0_cart_invA, dtype=float)
    n = model.size if n_states is None else min(n_states, model.size)
    h = model.hamiltonian(k0)
    if n < model.size:
        w, c = scipy.linalg.eigh(h, subset_by_index=(0, n - 1), driver="evr", check_finite=False)
    else:
        w, c = scipy.linalg.eigh(h, driver="evd", check_finite=False)
    kg = k0[None, :] + model.basis.g_cart_invA  # (n_G, d)
    pi = np.einsum("gn,gi,gm->inm", c.conj(), kg, c, optimize=True)
    return Eigenstates(k0_cart_invA=k0, energies_eV=w, vectors=c, momentum_invA=pi)


def degenerate_set(states: Eigenstates, band: int, tol_eV: float = DEGENERACY_TOL_EV) -> np.ndarray:
    """Indices of the levels degenerate with ``band`` at k0 (``band`` included)."""
    e = states.energies_eV
    return np.flatnonzero(np.abs(e - e[band]) <= tol_eV)


def inverse_mass_tensor(states: Eigenstates, band: int, n_sum: int | None = None,
                        check: bool = True) -> np.ndarray:
    """(m0/m*)_ij of a non-degenerate band by the sum over states.

    (m0/m*)_ij = δ_ij + 4C Σ_{l≠n} Re(π^i_nl π^j_ln)/(E_n − E_l), C = ħ²/2m0 (module docstring).

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
    return np.eye(d) + 4.0 * C * 0.5 * (tensor + tensor.T)


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


def effective_hamiltonian_in_q(states: Eigenstates, subspace: np.ndarray,
                               q_cart_invA: np.ndarray) -> np.ndarray:
    """Second-order Löwdin effective Hamiltonian of a degenerate set at k0 + q (eV).

    The unperturbed energies are E_n(k0), the perturbation W(q) = 2C q·π + C q² (the k·p
    Hamiltonian in the basis of k0 eigenstates), partitioned with
    :func:`bandpert.perturbation.lowdin_effective_hamiltonian` at order 2. Exactly quadratic
    in q (plus the first-order q·π within the set, which vanishes by symmetry at Γ of a cubic
    crystal).
    """
    q = np.asarray(q_cart_invA, dtype=float)
    w = 2.0 * C * np.einsum("i,inm->nm", q, states.momentum_invA)
    w = w + C * (q @ q) * np.eye(w.shape[0])
    return lowdin_effective_hamiltonian(states.energies_eV, w, subspace, order=2,
                                        degeneracy_tol=DEGENERACY_TOL_EV * 0.1)


@dataclass(frozen=True)
class DegenerateEdge:
    """Dispersion of a degenerate band edge from the Löwdin effective Hamiltonian.

    Attributes
    ----------
    bands : numpy.ndarray
        Indices of the degenerate set.
    energy_eV : float
        Energy of the edge.
    direction_curvatures : dict
        Direction label → ascending eigenvalues of H_eff(q)/(C q²) (m0/m* of each band along
        the direction, sign kept: negative for a maximum).
    dkk_LMN : tuple of float or None
        Dresselhaus–Kip–Kittel L, M, N as usually defined (units ħ²/2m0, the free-electron
        term excluded; :mod:`bandpert.kp.parameters`) for a threefold cubic edge, else None.
    luttinger : tuple of float or None
        γ1 = −1 − (L + 2M)/3, γ2 = −(L − M)/6, γ3 = −N/6 (CONVENTIONS.md).
    """

    bands: np.ndarray
    energy_eV: float
    direction_curvatures: dict[str, np.ndarray]
    dkk_LMN: tuple[float, float, float] | None
    luttinger: tuple[float, float, float] | None


def degenerate_edge(states: Eigenstates, band: int,
                    subspace: np.ndarray | None = None) -> DegenerateEdge:
    """Löwdin k·p analysis of the degenerate set containing ``band`` at k0.

    Along u = [100], [110], [111] the eigenvalues of H_eff(q u)/(C q²) give each band's m0/m*.
    For a threefold edge of a cubic crystal (Γ25′/Γ15) the DKK form gives, with x̂ = [100]:
    eigenvalues {1 + L, 1 + M, 1 + M}; along [111]: {1 + (L + 2M + 2N)/3, 1 + (L + 2M − N)/3
    (twice)}, the 1 being the free-electron term
    (Dresselhaus, Kip & Kittel 1955), from which L, M and N follow independently of the
    basis the degenerate eigenvectors happen to come in.
    """
    sub = degenerate_set(states, band) if subspace is None else np.asarray(subspace)
    d = states.momentum_invA.shape[0]
    curv: dict[str, np.ndarray] = {}
    if d == 3:
        for name, u in CUBIC_DIRECTIONS.items():
            u = np.array(u) / np.linalg.norm(u)
            h = effective_hamiltonian_in_q(states, sub, u) - states.energies_eV[sub[0]] * np.eye(
                sub.size)
            curv[name] = np.linalg.eigvalsh(h) / C
    else:
        for i in range(d):
            u = np.eye(d)[i]
            h = effective_hamiltonian_in_q(states, sub, u) - states.energies_eV[sub[0]] * np.eye(
                sub.size)
            curv[f"axis {i + 1}"] = np.linalg.eigvalsh(h) / C
    lmn = lut = None
    if d == 3 and sub.size == 3:
        c100, c111 = curv["[100]"], curv["[111]"]
        single100, double100 = _single_and_double(c100)
        single111, double111 = _single_and_double(c111)
        big_l, big_m = single100 - 1.0, double100 - 1.0  # the usual L, M: free term removed
        big_n = single111 - double111  # (L+2M+2N)/3 − (L+2M−N)/3 = N
        lmn = (float(big_l), float(big_m), float(big_n))
        lut = luttinger_from_dkk(*lmn)
    return DegenerateEdge(bands=sub, energy_eV=float(states.energies_eV[band]),
                          direction_curvatures=curv, dkk_LMN=lmn,
                          luttinger=None if lut is None else tuple(float(x) for x in lut))


def _single_and_double(w: np.ndarray) -> tuple[float, float]:
    """Split three eigenvalues into the non-repeated one and the (nearly) repeated pair."""
    w = np.sort(w)
    if abs(w[1] - w[0]) < abs(w[2] - w[1]):
        return float(w[2]), float(0.5 * (w[0] + w[1]))
    return float(w[0]), float(0.5 * (w[1] + w[2]))


def warped_dos_mass(states: Eigenstates, subspace: np.ndarray,
                    n_directions: int = 600) -> np.ndarray:
    """Density-of-states mass of each band of a degenerate set: ⟨|m(u)|^{3/2}⟩^{2/3} over
    directions u, for warped bands E = ħ²k²/(2 m0/|c(u)|) (the DOS of E ∝ k²/m(u) is
    ∝ ⟨m(u)^{3/2}⟩ √E; common practice, no source). Directions are quasi-uniform (Fibonacci
    sphere); 600 of them converge the average to about 0.1 %."""
    i = np.arange(n_directions) + 0.5
    phi = np.arccos(1 - 2 * i / n_directions)
    theta = np.pi * (1 + 5**0.5) * i
    u = np.stack([np.cos(theta) * np.sin(phi), np.sin(theta) * np.sin(phi), np.cos(phi)], axis=1)
    e0 = states.energies_eV[subspace[0]]
    curv = np.array([np.linalg.eigvalsh(effective_hamiltonian_in_q(states, subspace, x)
                                        - e0 * np.eye(subspace.size)) / C for x in u])
    masses = 1.0 / np.abs(curv)  # (n_dir, g), sorted by curvature at each u
    return np.mean(masses**1.5, axis=0) ** (2 / 3)


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


@dataclass(frozen=True)
class BandMasses:
    """Everything bandpert reports about the effective masses of one band at one k.

    Attributes
    ----------
    label : str
        "conduction minimum", "valence maximum" or "band N at k".
    band : int
        0-based band index (sorted at k).
    k_cart_invA, k_frac : numpy.ndarray
        The point, Cartesian (Å⁻¹) and in reciprocal fractions.
    energy_eV : float
        Absolute energy of the band there.
    degenerate_bands : numpy.ndarray
        Bands degenerate with it at k (itself included), judged against the basis
        (:mod:`bandpert.physics.critical_points`).
    critical_point : CriticalPoint
        What the point is (minimum, maximum, saddle, crossing, not stationary).
    tensor : MassTensor or None
        Sum-over-states tensor (non-degenerate band; None at a crossing).
    finite_difference : numpy.ndarray or None
        The finite-difference tensor of the exact band (non-degenerate band).
    relative_difference : float or None
        max |SOS − FD| / max |FD|.
    convergence_counts, convergence_masses : numpy.ndarray or None
        Principal masses against the number of states kept in the sum.
    valleys : int or None
        Symmetry-equivalent copies of k (3D crystals; only at a minimum or maximum).
    dos_mass, conductivity_mass : float or None
        For the valleys (non-degenerate) or the degenerate set (density-of-states mass from
        the warped bands; no conductivity mass); only at a minimum or maximum.
    effective_dos_cm3 : float or None
        N_c or N_v = 2(m_dos m0 kT/2πħ²)^{3/2} at ``temperature_K``; only at an extremum.
    temperature_K : float
    edge : DegenerateEdge or None
        Löwdin k·p analysis of a degenerate set (not at a crossing).
    band_dos_masses : numpy.ndarray or None
        Per band of a degenerate set, ⟨m(u)^{3/2}⟩^{2/3} (only at an extremum).
    summary : str
        One line: what the point is, and where the nearest extremum lies if it is none.
    """

    label: str
    band: int
    k_cart_invA: np.ndarray
    k_frac: np.ndarray
    energy_eV: float
    degenerate_bands: np.ndarray
    critical_point: CriticalPoint
    tensor: MassTensor | None
    finite_difference: np.ndarray | None
    relative_difference: float | None
    convergence_counts: np.ndarray | None
    convergence_masses: np.ndarray | None
    valleys: int | None
    dos_mass: float | None
    conductivity_mass: float | None
    effective_dos_cm3: float | None
    temperature_K: float
    edge: DegenerateEdge | None
    band_dos_masses: np.ndarray | None
    summary: str


def band_masses(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray, band: int,
                rotations: np.ndarray | None = None, temperature_K: float = 300.0,
                label: str = "", cross_check: bool = True, where: str = "") -> BandMasses:
    """Classify ``band`` at k, then give the masses the point carries.

    The point is classified first (:func:`bandpert.physics.critical_points.classify`). A
    non-degenerate band gets the sum-over-states tensor (signed) and the finite-difference
    cross-check; a degenerate set without linear splitting the Löwdin k·p analysis; a crossing
    no mass. Valley count, density-of-states and conductivity masses and the effective density
    of states exist only at a minimum or maximum.

    Parameters
    ----------
    material : Material
        For the degeneracy test in a basis centred on k.
    model : PlaneWaveModel
    k_cart_invA : numpy.ndarray
        (d,) the point (e.g. a refined band extremum).
    band : int
        0-based band index.
    rotations : numpy.ndarray, optional
        Point-group rotations (spglib, direct fractional coordinates) for the valley count.
    temperature_K : float
        For N_c / N_v.
    label : str
        Description carried into the result.
    cross_check : bool
        Also compute the finite-difference tensor and the convergence with the states kept
        (default). Sweeps switch it off: the tensor itself is unchanged.
    where : str
        The point in words, for the summary line.

    Raises
    ------
    InputError
        For a non-positive temperature or a band the basis does not hold (key ``band``).
    """
    if not temperature_K > 0:
        raise InputError(f"expected a positive temperature, got {temperature_K}",
                         key="temperature_K")
    k = np.asarray(k_cart_invA, dtype=float)
    if not 0 <= band < model.size:
        raise InputError(f"band {band + 1} does not exist: the basis holds {model.size}",
                         key="band")
    with single_blas_thread():  # many small eigenproblems: threads only contend
        return _band_masses(material, model, k, band, rotations, temperature_K, label,
                            cross_check, where)


def _band_masses(material: Material, model: PlaneWaveModel, k: np.ndarray, band: int,
                 rotations: np.ndarray | None, temperature_K: float, label: str,
                 cross_check: bool, where: str) -> BandMasses:
    states = eigenstates(model, k)
    e0 = states.energies_eV

    def set_curvature(group: np.ndarray, u: np.ndarray) -> np.ndarray:
        h = effective_hamiltonian_in_q(states, group, u) - e0[group[0]] * np.eye(group.size)
        return np.linalg.eigvalsh(h) / C

    cp = classify(material, model, k, band, set_curvature=set_curvature)
    group = cp.degenerate_bands
    k_frac = np.linalg.solve(model.reciprocal_invA.T, k)
    valleys = None
    if rotations is not None and k.size == 3 and cp.is_extremum:
        valleys = star_size(k_frac, rotations)
    common = dict(label=label or f"band {band + 1}", band=band, k_cart_invA=k, k_frac=k_frac,
                  energy_eV=float(e0[band]), degenerate_bands=group, critical_point=cp,
                  valleys=valleys, temperature_K=temperature_K,
                  summary=cp.describe(band, where or label or "k"))
    none = dict(tensor=None, finite_difference=None, relative_difference=None,
                convergence_counts=None, convergence_masses=None, dos_mass=None,
                conductivity_mass=None, effective_dos_cm3=None, edge=None, band_dos_masses=None)
    if not cp.carries_mass:
        return BandMasses(**common, **none)
    if group.size == 1:
        inv = inverse_mass_tensor(states, band, check=False)
        tensor = principal(inv)
        fd = finite_difference_inverse_mass(model, k, band) if cross_check else None
        counts, conv = sum_convergence(states, band) if cross_check else (None, None)
        dos = cond = n_eff = None
        if k.size == 3 and cp.is_extremum:
            dos = density_of_states_mass(tensor.principal_masses, valleys or 1)
            cond = conductivity_mass(tensor.principal_masses)
            n_eff = effective_density_of_states_cm3(dos, temperature_K)
        return BandMasses(**{**common, **none, **dict(
            tensor=tensor, finite_difference=fd,
            relative_difference=None if fd is None else
            float(np.abs(inv - fd).max() / np.abs(fd).max()),
            convergence_counts=counts, convergence_masses=conv, dos_mass=dos,
            conductivity_mass=cond, effective_dos_cm3=n_eff)})
    edge = degenerate_edge(states, band, group)
    band_dos = dos = n_eff = None
    if k.size == 3 and cp.is_extremum:
        band_dos = warped_dos_mass(states, group)
        # N summed over the bands of the set: m_dos^{3/2} = Σ_b m_b^{3/2}
        dos = float(np.sum(band_dos**1.5) ** (2 / 3))
        n_eff = effective_density_of_states_cm3(dos, temperature_K)
    return BandMasses(**{**common, **none, **dict(dos_mass=dos, effective_dos_cm3=n_eff,
                                                  edge=edge, band_dos_masses=band_dos)})


def edge_masses(bs, temperature_K: float = 300.0, cross_check: bool = True,
                reference_rotations: np.ndarray | None = None
                ) -> tuple[list[EdgeLocation], list[BandMasses]]:
    """Masses at the conduction minimum and the valence maximum of a semiconductor.

    The one routine for band-edge masses (``bandpert masses`` and every sweep point): the
    extrema found along the path are refined in the full k-space
    (:func:`bandpert.physics.critical_points.locate_edges`) before the masses are taken.

    Parameters
    ----------
    bs : bandpert.physics.bands.BandStructure
        Exact bands of a semiconductor (``bs.edges`` not None).
    temperature_K : float
        For N_c and N_v.
    cross_check : bool
        Passed to :func:`band_masses`.
    reference_rotations : numpy.ndarray, optional
        Point group of the unstrained crystal (strain sweeps), for :func:`locate_edges`.

    Returns
    -------
    edges : list of EdgeLocation
        Conduction minimum, valence maximum.
    masses : list of BandMasses
        The same order.
    """
    if bs.edges is None or bs.energies_eV is None:
        raise InputError("no band gap on the path (a metal, or no electrons.valence): give "
                         "the point and the band", bs.material.file, "point")
    rot = point_group_rotations(bs.material)
    edges = locate_edges(bs, reference_rotations)
    return edges, [band_masses(bs.material, bs.model, e.k_cart_invA, e.band, rot, temperature_K,
                               e.name, cross_check, where=e.where) for e in edges]
