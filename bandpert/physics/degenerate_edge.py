"""Degenerate band edges: the second-order Löwdin effective Hamiltonian in q at k0.

At a degenerate edge the scalar sum-over-states formula of :mod:`bandpert.physics.mass_tensor`
is replaced by the second-order Löwdin effective Hamiltonian in q = k − k0 (from
:mod:`bandpert.perturbation`), with the k·p perturbation W(q) = 2C q·π + βC q² in the basis
of the k0 eigenstates (β the kinetic factor, π as in :mod:`bandpert.physics.mass_tensor`).
For the spinless cubic valence triplet it is the Dresselhaus–Kip–Kittel
form with parameters L, M, N (Dresselhaus, Kip & Kittel, Phys. Rev. 98, 368 (1955)) in units
of ħ²/2m0; the warped bands give each band's density-of-states mass.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..kp.parameters import luttinger_from_dkk
from ..perturbation import lowdin_effective_hamiltonian
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²
from .mass_tensor import DEGENERACY_TOL_EV, Eigenstates, degenerate_set

#: Directions of the cubic warping analysis.
CUBIC_DIRECTIONS = {"[100]": (1.0, 0.0, 0.0), "[110]": (1.0, 1.0, 0.0), "[111]": (1.0, 1.0, 1.0)}


def effective_hamiltonian_in_q(states: Eigenstates, subspace: np.ndarray,
                               q_cart_invA: np.ndarray) -> np.ndarray:
    """Second-order Löwdin effective Hamiltonian of a degenerate set at k0 + q (eV).

    The unperturbed energies are E_n(k0), the perturbation W(q) = 2C q·π + βC q² (the k·p
    Hamiltonian in the basis of k0 eigenstates), partitioned with
    :func:`bandpert.perturbation.lowdin_effective_hamiltonian` at order 2. Exactly quadratic
    in q (plus the first-order q·π within the set, which vanishes by symmetry at Γ of a cubic
    crystal).
    """
    q = np.asarray(q_cart_invA, dtype=float)
    w = 2.0 * C * np.einsum("i,inm->nm", q, states.momentum_invA)
    w = w + states.kinetic_factor * C * (q @ q) * np.eye(w.shape[0])
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
