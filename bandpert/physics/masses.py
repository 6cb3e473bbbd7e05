"""Effective masses of one band at one point, and at the band edges of a semiconductor.

The point is classified first (:mod:`bandpert.physics.critical_points`); a non-degenerate band
gets the sum-over-states tensor of :mod:`bandpert.physics.mass_tensor` (Kittel, *Quantum
Theory of Solids*, 1963, ch. 9) with its checks, a degenerate set the Löwdin analysis of
:mod:`bandpert.physics.degenerate_edge`, and only a minimum or maximum gets valleys, DOS and
conductivity masses and N_c / N_v (:mod:`bandpert.physics.extrema`).
:func:`compute_masses` is what ``bandpert masses`` computes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..crystal.lattice import point_group_rotations
from ..errors import InputError
from ..input.material import Material
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
from ..planewave.solver import single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²
from .degenerate_edge import (
    DegenerateEdge,
    degenerate_edge,
    effective_hamiltonian_in_q,
    warped_dos_mass,
)
from .mass_tensor import (
    MassTensor,
    eigenstates,
    finite_difference_inverse_mass,
    inverse_mass_tensor,
    principal,
    sum_convergence,
)


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
