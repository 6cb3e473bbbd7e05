"""The optical spectrum of a material on a k-mesh: bands and momentum matrix elements from the
reduced-basis interpolation (:mod:`bandpert.physics.reduced_basis`) or from the exact fixed
plane-wave basis, summed into ε2, the joint DOS, ε1 and the f-sum (:mod:`bandpert.physics.optics`).

One-electron spectrum: no excitonic or local-field effects. Local potentials, spin–orbit
coupling (spinor bands of one electron each) and nonlocal wells: the matrix elements are those of
the velocity (1/ħ)∂H/∂k of the model's whole H(k), and the f-sum is compared with the
effective-mass sum rule's reference, βN for a local model
(:mod:`bandpert.physics.optics_velocity`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..crystal.kmesh import KMesh, fold_to_first_zone, reciprocal_mesh
from ..crystal.lattice import standard_path
from ..errors import InputError
from ..input.material import Material
from ..planewave.cutoff import choose_cutoff
from ..planewave.k_polynomial import k_polynomial
from ..planewave.model import build_k_centred_model
from ..planewave.solver import exact_energies, single_blas_thread
from .dos import fermi_level_from_count
from .hamiltonian_derivatives import MATRIX_STEP
from .optics import (
    HBAR2_OVER_M0_EV_A2,
    OpticalSums,
    accumulate,
    eps2_prefactor,
    gaussian_broaden,
    kramers_kronig,
    level_groups,
    n_eff_factor,
    occupations,
)
from .optics_velocity import velocities
from .reduced_basis import ReducedBasisSettings, fixed_superset_model, threaded_map
from .reduced_basis_check import InterpolatedBands, interpolated_bands
from .tetrahedra import occupations as tetrahedron_occupations

#: Default Gaussian broadening σ of the spectrum (eV).
DEFAULT_BROADENING_EV = 0.1

#: Conduction bands computed above the occupied ones by default.
DEFAULT_EXTRA_BANDS = 8

#: The interpolation used unless another (or none) is asked for.
DEFAULT_INTERPOLATION = ReducedBasisSettings()

#: Largest number of irreducible points diagonalised with every band of the fixed basis.
MAX_ALL_BAND_POINTS = 2000

#: Largest energy grid (points).
MAX_GRID = 200_000

#: The interband transitions named E0, E1, E2 by where they occur (Yu & Cardona, Fundamentals
#: of Semiconductors, Sec. 6.2: E0 at Γ, E1 along Λ near L, E2 near X).
CRITICAL_LABELS = (("E0", "Γ"), ("E1", "L"), ("E2", "X"))


@dataclass(frozen=True)
class OpticalSpectrum:
    """ε2, ε1, joint DOS and f-sum of a material on a mesh (direction-averaged, one-electron).

    Attributes
    ----------
    material : Material
    mesh : KMesh
    cutoff_eV : float
    n_bands : int
        Bands used at each k (every band of the basis with ``all_bands``).
    all_bands : bool
    energies_eV : numpy.ndarray
        (n_E,) photon energies from 0.
    eps2, eps1 : numpy.ndarray
        (n_E,) imaginary and real parts of ε (ε1 by Kramers–Kronig from ε2).
    jdos_per_eV : numpy.ndarray
        (n_E,) joint density of states per cell, both spins, occupation-weighted.
    n_eff : numpy.ndarray
        (n_E,) effective electron number below each energy (interband).
    n_eff_interband, n_eff_intraband : float
        Interband f-sum of every pair (no broadening) and the Drude weight.
    sum_rule : float
        What their sum tends to with every band and a dense mesh: the zone average
        g Σ_k w_k Σ_n f_n (m0/ħ²)⟨n|∂²H/∂k²⟩ (direction-averaged) of the occupied states
        (:mod:`~bandpert.physics.optics_velocity`); βN exactly for a local model.
    k_terms : tuple of str
        The k-dependent terms of H(k) that make ``sum_rule`` differ from βN
        ("spin-orbit", "nonlocal"); empty for a local model.
    eps1_zero_direct : float
        1 + (2/π)∫ε2/E dE from the transitions directly (to check Kramers–Kronig).
    broadening_eV : float
    complete_below_eV : float
        Photon energy below which every transition is among the bands computed.
    fermi_level_eV : float or None
        None for an insulator (filled bands).
    critical_points_eV : dict
        E0, E1, E2: lowest conduction minus highest valence level at Γ, L, X (exact bands),
        where the path has those points and the crystal has a gap.
    peaks_eV : numpy.ndarray
        Local maxima of ε2 above a fifth of its largest value, below ``complete_below_eV``.
    interpolation : InterpolatedBands or None
    """

    material: Material
    mesh: KMesh
    cutoff_eV: float
    n_bands: int
    all_bands: bool
    energies_eV: np.ndarray
    eps2: np.ndarray
    eps1: np.ndarray
    jdos_per_eV: np.ndarray
    n_eff: np.ndarray
    n_eff_interband: float
    n_eff_intraband: float
    sum_rule: float
    k_terms: tuple[str, ...]
    eps1_zero_direct: float
    broadening_eV: float
    complete_below_eV: float
    fermi_level_eV: float | None
    critical_points_eV: dict
    peaks_eV: np.ndarray
    interpolation: InterpolatedBands | None

    @property
    def n_eff_total(self) -> float:
        """Interband plus intraband effective electron number (the f-sum)."""
        return self.n_eff_interband + self.n_eff_intraband


def _check(material: Material, broadening_eV: float, energy_step_eV: float) -> None:
    if material.dimension != 3:
        raise InputError(f"a {material.dimension}-dimensional crystal; expected a 3D one (ε "
                         "is a bulk property)", material.file, "lattice")
    if material.valence_electrons is None:
        raise InputError("no electron count; expected electrons.valence (the occupied bands "
                         "decide the transitions)", material.file, "electrons.valence")
    if not (np.isfinite(broadening_eV) and broadening_eV > 0):
        raise InputError(f"got {broadening_eV!r} eV; expected a positive width",
                         key="broadening_eV")
    if not (np.isfinite(energy_step_eV) and 0 < energy_step_eV <= broadening_eV):
        raise InputError(f"got {energy_step_eV!r} eV; expected a positive step no larger than "
                         f"the broadening ({broadening_eV:g} eV)", key="energy_step_eV")


def _labelled_transitions(material: Material, cutoff_eV: float, n_occupied: int) -> dict:
    points, _ = standard_path(material)
    found = [(name, label) for name, label in CRITICAL_LABELS if label in points]
    if not found:
        return {}
    b = build_k_centred_model(material, cutoff_eV)
    frac = np.array([points[label] for _, label in found], dtype=float)
    k = fold_to_first_zone(frac, b.reciprocal_invA) @ b.reciprocal_invA
    e = exact_energies(b, k, n_occupied + 1)
    return {name: float(e[i, n_occupied] - e[i, n_occupied - 1])
            for i, (name, _) in enumerate(found)}


def _states(source, k: np.ndarray, n_bands: int, block: int, step_invA: float):
    """(polynomial, rows, energies, momentum, curvature) blocks: from reduced bases (grouped)
    or one (:func:`~bandpert.physics.optics_velocity.velocities`).

    The blocks are diagonalised on :data:`~bandpert.physics.reduced_basis.THREADS` threads and
    come back in order.
    """
    groups = source.groups(k) if hasattr(source, "groups") else [(source, np.arange(len(k)))]
    blocks = [(poly, rows[s:s + block]) for poly, rows in groups
              for s in range(0, len(rows), block)]

    def work(item):
        poly, r = item
        e, v = poly.eigensystem(k[r], n_bands)
        return (poly, r, e) + velocities(poly, k[r], v, step_invA)

    yield from threaded_map(work, blocks)


#: Step (Å⁻¹) of the central differences of the band curvature (the intraband weight).
CURVATURE_STEP_INVA = 1e-4


def inverse_mass(poly, k_cart_invA: np.ndarray, n_bands: int) -> np.ndarray:
    """Direction-averaged inverse effective mass m0/m* = (m0/ħ²) ∇²E_n/3 of each band, (n_k, n).

    By central differences of the band energies of the same matrix H(k) (one fixed basis, so
    E_n(k) is smooth wherever band n is not degenerate), step :data:`CURVATURE_STEP_INVA`
    along x, y, z. Independent of the momentum matrix elements: the f-sum then tests them.
    Levels (near-)degenerate at k (groups of :func:`~bandpert.physics.optics.level_groups`)
    split or anticross within the stencil, so each sorted branch has a curvature of order
    |v|/step or |p|²/gap; their sum is smooth, and each member of a group takes the group's
    mean (the transitions inside a group are left out of the interband sums alike). More bands
    are diagonalised until a group at the top is whole.
    """
    h = CURVATURE_STEP_INVA
    n = min(n_bands + 4, poly.size)
    centre = poly.eigenvalues(k_cart_invA, n)
    while n < poly.size and np.any(level_groups(centre)[:, -1]
                                   == level_groups(centre)[:, n_bands - 1]):
        n = min(2 * n, poly.size)
        centre = poly.eigenvalues(k_cart_invA, n)
    lap = np.zeros_like(centre)
    for axis in range(k_cart_invA.shape[1]):
        step = np.zeros(k_cart_invA.shape[1])
        step[axis] = h
        lap += (poly.eigenvalues(k_cart_invA + step, n)
                + poly.eigenvalues(k_cart_invA - step, n) - 2.0 * centre) / h**2
    label = level_groups(centre) + (np.arange(len(centre)) * n)[:, None]
    sums = np.bincount(label.ravel(), weights=lap.ravel(), minlength=len(centre) * n)
    sizes = np.bincount(label.ravel(), minlength=len(centre) * n)
    mean = (sums / np.maximum(sizes, 1))[label]
    return mean[:, :n_bands] / (HBAR2_OVER_M0_EV_A2 * k_cart_invA.shape[1])


def optical_spectrum(material: Material, n_per_axis: int | tuple[int, ...],
                     n_bands: int | None = None, cutoff_eV: float | None = None,
                     broadening_eV: float = DEFAULT_BROADENING_EV,
                     energy_step_eV: float = 0.01,
                     interpolation: ReducedBasisSettings | None = DEFAULT_INTERPOLATION,
                     all_bands: bool = False) -> OpticalSpectrum:
    """ε2(E), ε1(E), the joint DOS and the f-sum of a material on a Γ-centred mesh.

    Parameters
    ----------
    material : Material
        3D, with ``electrons.valence``; spin–orbit coupling and nonlocal wells allowed.
    n_per_axis : int or tuple of int
        Mesh points per reciprocal axis (its irreducible points are used: the direction average
        of ε is invariant under the point group).
    n_bands : int, optional
        Bands at each k (default: occupied + :data:`DEFAULT_EXTRA_BANDS`).
    cutoff_eV : float, optional
    broadening_eV : float
        Gaussian width σ of every transition.
    energy_step_eV : float
        Grid step (at most σ).
    interpolation : ReducedBasisSettings or None
        Reduced-basis interpolation with its check (default); None diagonalises every point in
        the fixed set of plane waves that holds all their k-centred bases.
        A metal's Fermi level comes from the tetrahedron count
        (:func:`~bandpert.physics.dos.fermi_level_from_count`).
    all_bands : bool
        Every band of the fixed basis (no interpolation; at most :data:`MAX_ALL_BAND_POINTS`
        irreducible points): the f-sum is then complete.
    Returns
    -------
    OpticalSpectrum
    """
    _check(material, broadening_eV, energy_step_eV)
    n_e = material.valence_electrons
    g = material.electrons_per_band
    n_half = int(np.ceil(n_e / g))
    nb = n_bands or n_half + DEFAULT_EXTRA_BANDS * (2 // g)
    # the cutoff rule converges the spinless bands (as for the band structure)
    cutoff = choose_cutoff(material.local_spinless(), -(-nb * g // 2), cutoff_eV)
    mesh = reciprocal_mesh(material, n_per_axis)
    k = mesh.k_cart_invA
    run = None
    if all_bands or interpolation is None:
        if all_bands and len(k) > MAX_ALL_BAND_POINTS:
            raise InputError(f"{len(k)} irreducible points with every band of the basis; "
                             f"expected at most {MAX_ALL_BAND_POINTS} (a smaller mesh)",
                             material.file, "mesh")
        fixed = fixed_superset_model(material, cutoff, k)
        source, block = k_polynomial(fixed), 4
        energies = exact_energies(fixed, k, nb)
        nb = fixed.matrix_size if all_bands else nb
    else:
        run = interpolated_bands(material, k, nb, cutoff, interpolation)
        source, energies, block = run.model, run.energies_eV, 256
    window = energies
    insulator = (n_e % g == 0 and window.shape[1] > n_half
                 and window[:, n_half - 1].max() < window[:, n_half].min())
    e_f = None if insulator else fermi_level_from_count(mesh, window, n_e)
    top = float(window[:, -1].min())
    occupied_top = float(window[:, n_half - 1].max()) if insulator else e_f
    complete = top - occupied_top if not all_bands else np.inf
    span = (float(window[:, -1].max() - window[:, 0].min()) if not all_bands else None)
    sums: OpticalSums | None = None
    grid = None
    n_window = window.shape[1]
    # a metal's levels are occupied by the tetrahedron weights at E_F (the count that fixed E_F)
    f_metal = None if insulator else tetrahedron_occupations(mesh, window, e_f)
    drude = 0.0
    rule = 0.0
    step = MATRIX_STEP * 2.0 * np.pi / material.a_A
    with single_blas_thread():
        for poly, rows, e, q, curvature in _states(source, k, nb, block, step):
            if grid is None:
                reach = span if span is not None else 1.05 * float(e[:, -1].max() - e[:, 0].min())
                n_grid = int(np.ceil((reach + KERNEL_PAD * broadening_eV) / energy_step_eV)) + 1
                if n_grid > MAX_GRID:
                    raise InputError(f"an energy grid of {n_grid} points; expected at most "
                                     f"{MAX_GRID} (a larger step)", key="energy_step_eV")
                grid = np.arange(n_grid) * energy_step_eV
            if insulator:
                f = occupations(e, None, n_half)
            else:
                f = np.zeros(e.shape)
                f[:, :n_window] = f_metal[rows]
                partly = np.flatnonzero(f_metal[rows].max(axis=0) > 0)
                top_band = int(partly.max()) + 1 if partly.size else 0
                if top_band:
                    x = inverse_mass(poly, k[rows], top_band)
                    drude += g * float(mesh.weights[rows] @ np.sum(f[:, :top_band] * x, axis=1))
            sums = accumulate(grid, e, q, mesh.weights[rows], f, g, sums)
            rule += g * float(mesh.weights[rows] @ np.sum(f * curvature, axis=1))
    terms = tuple(name for name, present in (("spin-orbit", material.spin_orbit is not None),
                                             ("nonlocal", material.nonlocal_terms is not None))
                  if present)
    if not terms:  # ∂²H/∂k² = βħ²/m0 exactly: the f-sum rule βN itself
        rule = material.potential.kinetic_factor * n_e
    eps2 = eps2_prefactor(material.volume_A, g) * gaussian_broaden(grid, sums.strength,
                                                                    broadening_eV)
    jdos = g * gaussian_broaden(grid, sums.joint, broadening_eV)
    integrand = grid * eps2
    n_eff = n_eff_factor(material.volume_A) * np.concatenate(
        [[0.0], np.cumsum(0.5 * (integrand[1:] + integrand[:-1]) * energy_step_eV)])
    eps1 = kramers_kronig(grid, eps2)
    eps1_zero = 1.0 + (2.0 / np.pi) * eps2_prefactor(material.volume_A, g) * sums.inverse_cube
    shown = grid < min(complete, grid[-1])
    peaks = np.flatnonzero((eps2[1:-1] > eps2[:-2]) & (eps2[1:-1] >= eps2[2:])
                           & (eps2[1:-1] > 0.2 * eps2[shown].max(initial=0.0))
                           & shown[1:-1]) + 1
    critical = _labelled_transitions(material, cutoff, n_half) if insulator else {}
    return OpticalSpectrum(
        material=material, mesh=mesh, cutoff_eV=float(cutoff), n_bands=int(nb),
        all_bands=all_bands, energies_eV=grid, eps2=eps2, eps1=eps1, jdos_per_eV=jdos,
        n_eff=n_eff, n_eff_interband=sums.f_sum, n_eff_intraband=drude, sum_rule=float(rule),
        k_terms=terms,
        eps1_zero_direct=float(eps1_zero), broadening_eV=float(broadening_eV),
        complete_below_eV=float(complete), fermi_level_eV=e_f, critical_points_eV=critical,
        peaks_eV=grid[peaks], interpolation=run)


#: The grid runs this many widths past the largest transition.
KERNEL_PAD = 8.0
