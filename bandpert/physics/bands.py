"""Exact bands along a labelled path (LAPACK, :mod:`bandpert.planewave.solver`), and the choices
that make a band structure usable: the energy zero (valence-band maximum for a semiconductor,
Fermi level for a metal, chosen by :func:`choose_energy_zero` for every command) and the band
edges. The cutoff comes from the one rule of :mod:`bandpert.planewave.cutoff`.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..crystal.kmesh import reciprocal_mesh
from ..crystal.lattice import KPath, Symmetry, crystal_symmetry, sample_path, standard_path
from ..errors import InputError, ModelWarning
from ..input.material import Material
from ..perturbation import perturbative_levels
from ..physics.dos import DEFAULT_SMEARING_EV, fermi_level_from_count
from ..physics.perturbative_bands import (
    Comparison,
    PerturbationSettings,
    PerturbativeBands,
    compare,
    perturbative_bands,
    perturbative_energies,
)
from ..planewave.cutoff import choose_cutoff
from ..planewave.model import KCentredModel, PlaneWaveModel, build_k_centred_model
from ..planewave.solver import Progress, choose_solver, exact_energies


def default_bands(material: Material) -> int:
    """Default number of bands: the file's ``basis.bands``, else the occupied bands plus four.

    With spin–orbit coupling bands are spinor bands (one electron each), so both counts double.
    """
    if material.n_bands is not None:
        return material.n_bands
    occupied = (material.valence_electrons or 8) // 2 + (material.valence_electrons or 8) % 2
    return (occupied + 4) * (2 // material.electrons_per_band)


@dataclass(frozen=True)
class BandEdges:
    """Band edges of a semiconductor along the path (indices into the k-points)."""

    valence_max_eV: float
    valence_max_index: int
    conduction_min_eV: float
    conduction_min_index: int
    gap_eV: float
    direct_gap_eV: float
    direct_gap_index: int


def band_edges(energies_eV: np.ndarray, n_valence_bands: int) -> BandEdges | None:
    """Valence maximum, conduction minimum and gaps along a path; None if there is no gap.

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n_k, n_bands), sorted at each k.
    n_valence_bands : int
        Number of fully occupied bands.
    """
    if n_valence_bands < 1 or n_valence_bands >= energies_eV.shape[1]:
        return None
    v = energies_eV[:, n_valence_bands - 1]
    c = energies_eV[:, n_valence_bands]
    iv, ic = int(np.argmax(v)), int(np.argmin(c))
    if c[ic] <= v[iv]:
        return None
    direct = c - v
    idg = int(np.argmin(direct))
    return BandEdges(float(v[iv]), iv, float(c[ic]), ic, float(c[ic] - v[iv]),
                     float(direct[idg]), idg)


@dataclass(frozen=True)
class BandStructure:
    """Bands of a plane-wave model along a path: exact, perturbative, or both.

    Attributes
    ----------
    material : Material
    symmetry : Symmetry
    path : KPath
    model : PlaneWaveModel
        The Γ-centred fixed basis of the cutoff: the perturbative series and the basis size.
    energies_eV : numpy.ndarray or None
        (n_k, n_bands) exact absolute energies (the model's zero, V(G=0) as given), each k in
        its own basis ħ²|k+G|²/2m0 ≤ cutoff (``k_centred``); None when the exact
        diagonalisation was skipped.
    energy_zero_eV : float
        Reference used for display: subtract it from the absolute energies.
    energy_zero_kind : str
        "valence-band maximum", "Fermi level" or "absolute".
    edges : BandEdges or None
        Semiconductor edges (absolute energies), None for a metal or without an electron count.
    perturbative : PerturbativeBands or None
        Perturbative bands at the same k-points, if asked for.
    comparison : Comparison or None
        Perturbative against exact, when both were computed.
    k_centred : KCentredModel or None
        The model with a basis centred on each k that gave ``energies_eV``; ``k_centred.at(k0)``
        is the fixed basis for derivative stencils around k0.
    solver : str
        The solver of the exact bands: "dense" (LAPACK) or "iterative" (LOBPCG,
        :func:`~bandpert.planewave.solver.choose_solver`).
    fermi_mesh : int or None
        Points per axis of the mesh that gave a metal's Fermi level (None when the zero is a
        valence-band maximum or absolute).
    """

    material: Material
    symmetry: Symmetry
    path: KPath
    model: PlaneWaveModel
    energies_eV: np.ndarray | None
    energy_zero_eV: float
    energy_zero_kind: str
    edges: BandEdges | None
    perturbative: PerturbativeBands | None = None
    comparison: Comparison | None = None
    k_centred: KCentredModel | None = None
    solver: str = "dense"
    fermi_mesh: int | None = None

    @property
    def reference_energies_eV(self) -> np.ndarray:
        """The exact energies, or the perturbative ones when the exact ones were skipped."""
        if self.energies_eV is not None:
            return self.energies_eV
        return self.perturbative.energies_eV

    @property
    def relative_energies_eV(self) -> np.ndarray:
        """Reference energies measured from the energy zero."""
        return self.reference_energies_eV - self.energy_zero_eV

    @property
    def n_bands(self) -> int:
        """Bands per k-point."""
        return int(self.reference_energies_eV.shape[1])


def choose_energy_zero(energies_eV: np.ndarray, n_electrons: int | None,
                       fermi_level_eV: Callable[[], float]) -> tuple[float, str, BandEdges | None]:
    """The one rule for the display zero: valence-band maximum, Fermi level, or none.

    With an even electron count 2m and band m wholly below band m + 1 on the k-points given
    (:func:`band_edges`), the crystal is a semiconductor and the zero is the valence maximum;
    with an electron count otherwise, the zero is the Fermi level; without one, absolute.

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n_k, n_bands) absolute energies on the k-points that decide (a path or a mesh).
    n_electrons : int or None
        Valence electrons per primitive cell.
    fermi_level_eV : callable
        Returns the Fermi level (eV); called only when it is the zero.

    Returns
    -------
    zero_eV, kind, edges
        ``kind`` is "valence-band maximum", "Fermi level" or "absolute".
    """
    if n_electrons is None:
        return 0.0, "absolute", None
    edges = band_edges(energies_eV, n_electrons // 2) if n_electrons % 2 == 0 else None
    if edges is not None:
        return edges.valence_max_eV, "valence-band maximum", edges
    return float(fermi_level_eV()), "Fermi level", None


#: Points per axis of the mesh for a metal's Fermi level, by dimension (1D, 2D, 3D).
DEFAULT_FERMI_MESH = {1: 600, 2: 60, 3: 24}


def energy_reference(material: Material, path_energies_eV: np.ndarray,
                     mesh_energies: Callable[[np.ndarray, int], np.ndarray],
                     fermi_mesh: int | None = None, fermi_method: str = "tetrahedron",
                     smearing_eV: float = DEFAULT_SMEARING_EV
                     ) -> tuple[float, str, BandEdges | None]:
    """Energy zero of a band structure (:func:`choose_energy_zero` on the path's energies).

    A metal's Fermi level comes from the one k-mesh (:func:`~bandpert.crystal.kmesh
    .reciprocal_mesh`) and the one Fermi-level routine
    (:func:`~bandpert.physics.dos.fermi_level_from_count`: linear tetrahedra by default), the
    same as ``bandpert dos`` on the same mesh.

    Parameters
    ----------
    material : Material
    path_energies_eV : numpy.ndarray
        (n_k, n_bands) absolute energies on the path.
    mesh_energies : callable
        ``mesh_energies(k_cart_invA, n_bands)`` → (n_mesh, n_bands) energies on the mesh.
    fermi_mesh : int, optional
        Mesh points per axis (default 24 in 3D, 60 in 2D, 600 in 1D).
    fermi_method : str
        "tetrahedron" (default) or "gaussian".
    smearing_eV : float
        Gaussian width (``fermi_method="gaussian"`` only).

    Returns
    -------
    zero_eV, kind, edges
    """
    # spinor bands hold one electron each: the count of spinless-equivalent electrons (two per
    # band) fills the same number of bands
    n_el = None if material.valence_electrons is None else (
        material.valence_electrons * 2 // material.electrons_per_band)

    def fermi() -> float:
        n = fermi_mesh or DEFAULT_FERMI_MESH[material.dimension]
        mesh = reciprocal_mesh(material, n)
        energies = mesh_energies(mesh.k_cart_invA, n_el // 2 + 4)
        return fermi_level_from_count(mesh, energies, n_el, method=fermi_method,
                                      smearing_eV=smearing_eV)

    return choose_energy_zero(path_energies_eV, n_el, fermi)


#: Most k-points along a path (a path of 1e6 points would take hours and gigabytes).
MAX_PATH_POINTS = 100_000


def compute_band_structure(material: Material, n_k: int = 200, n_bands: int | None = None,
                           cutoff_eV: float | None = None, fermi_mesh: int | None = None,
                           progress: Progress | None = None, exact: bool = True,
                           perturbation: PerturbationSettings | None = None,
                           check_cutoff: bool = True, fermi_method: str = "tetrahedron",
                           smearing_eV: float = DEFAULT_SMEARING_EV,
                           fermi_level: bool = True, solver: str = "auto") -> BandStructure:
    """Material → bands along its standard (or custom) path: exact and/or perturbative.

    Parameters
    ----------
    material : Material
    n_k : int
        Number of k-points along the path (approximately; every label is hit).
    n_bands : int, optional
        Bands to compute; default :func:`default_bands`.
    cutoff_eV : float, optional
        Overrides the file's cutoff (:func:`~bandpert.planewave.cutoff.choose_cutoff`).
    fermi_mesh : int, optional
        k-points per axis of the uniform mesh for a metal's Fermi level.
    progress : callable, optional
        ``progress(done, total)`` for the path diagonalisation.
    exact : bool
        Diagonalise H(k) exactly (default). Without it the perturbative bands set the zero.
    perturbation : PerturbationSettings, optional
        Also compute perturbative bands (H0 = kinetic energy, V = crystal potential).
    check_cutoff : bool
        With a given cutoff, warn when it is not converged
        (:func:`~bandpert.planewave.cutoff.warn_if_unconverged`, default). A sweep checks
        once at its reference point and switches it off per point.
    fermi_method, smearing_eV : str, float
        How a metal's Fermi level is found (:func:`energy_reference`).
    fermi_level : bool
        Find a metal's Fermi level for the energy zero (default). False leaves a metal's zero
        absolute and diagonalises no k-mesh, for callers that use absolute energies only (a
        sweep point: the mesh of a metal with little symmetry costs ten times the path).
    solver : str
        "auto" (default), "dense" or "iterative": the solver of the exact bands
        (:func:`~bandpert.planewave.solver.choose_solver`).

    Returns
    -------
    BandStructure
    """
    if n_k < 2:
        raise InputError(f"expected at least 2 k-points, got {n_k}", key="n_k")
    if n_k > MAX_PATH_POINTS:  # before the path is sampled
        raise InputError(f"expected at most {MAX_PATH_POINTS} k-points along the path, got "
                         f"{n_k}", key="n_k")
    if not exact and perturbation is None:
        raise InputError("nothing to compute: the exact bands are skipped and no perturbative "
                         "bands were asked for", key="exact")
    nb = default_bands(material) if n_bands is None else n_bands
    # the cutoff rule converges the spinless bands (spin-orbit coupling shifts them by
    # a few tenths of an eV at most, and the rule's bands are the spinless count)
    spinless_bands = -(-nb * material.electrons_per_band // 2)
    k_centred = build_k_centred_model(material, choose_cutoff(
        material.local_spinless(), spinless_bands, cutoff_eV, check_cutoff))
    model = k_centred.gamma
    points, legs = standard_path(material)
    path = sample_path(model.reciprocal_invA, points, legs, n_k)
    used = choose_solver(k_centred, nb, solver)
    energies = (exact_energies(k_centred, path.k_cart_invA, nb, progress, solver)
                if exact else None)
    pert = None
    if perturbation is not None:
        pert = perturbative_bands(model, path.k_cart_invA, nb, perturbation, path.label_indices)
        outside = pert.convergence_radius <= perturbation.lam
        if outside.any():
            warnings.warn(f"λ = {perturbation.lam:g} lies outside the convergence radius of the "
                          f"perturbation series on {100 * outside.mean():.0f} % of the sampled "
                          "(band, k) points: there the low-order result is not a convergent "
                          "expansion (see the validity map)", ModelWarning, stacklevel=2)

    def mesh_energies(k_cart: np.ndarray, n: int) -> np.ndarray:
        n = min(n, model.matrix_size)
        if exact:
            return exact_energies(k_centred, k_cart, n, solver=solver)
        if model.k_dependent:
            return perturbative_energies(model, k_cart, n, perturbation)
        return perturbative_levels(model.kinetic_eV(k_cart), model.potential_eV, n,
                                   lam=perturbation.lam, order=perturbation.order,
                                   coupling_threshold=perturbation.coupling_threshold,
                                   estimate_error=False).energies

    comparison = None
    if energies is not None and pert is not None:
        # The series expands H(k) on the Γ-centred basis of ``model``; its error is measured
        # against the exact eigenvalues of that same matrix (what the proven bound vouches
        # for). The exact curves use the basis centred on each k, which keeps the symmetry
        # degeneracies; the two exact sets differ only by the basis truncation, which the
        # cutoff rule keeps converged.
        same_basis = exact_energies(model, path.k_cart_invA, nb, solver=solver)
        comparison = compare(same_basis, pert)
    reference = energies if energies is not None else pert.energies_eV
    if fermi_level:
        zero, kind, edges = energy_reference(material, reference, mesh_energies, fermi_mesh,
                                             fermi_method, smearing_eV)
    else:
        # spinor bands hold one electron each (as in energy_reference)
        n_el = None if material.valence_electrons is None else (
            material.valence_electrons * 2 // material.electrons_per_band)
        zero, kind, edges = choose_energy_zero(reference, n_el, lambda: 0.0)
        if edges is None:
            zero, kind = 0.0, "absolute"
    mesh = ((fermi_mesh or DEFAULT_FERMI_MESH[material.dimension]) if kind == "Fermi level"
            else None)
    return BandStructure(material=material, symmetry=crystal_symmetry(material), path=path,
                         model=model, energies_eV=energies, energy_zero_eV=float(zero),
                         energy_zero_kind=kind, edges=edges, perturbative=pert,
                         comparison=comparison, k_centred=k_centred, solver=used,
                         fermi_mesh=mesh)
