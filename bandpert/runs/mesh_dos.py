"""Dense k-mesh jobs: exact bands on the irreducible wedge of a uniform mesh, spread over workers,
then the density of states and the Fermi level (:mod:`bandpert.physics.dos`).

The irreducible points (spglib's irreducible reciprocal mesh in 3D) are cut into contiguous blocks;
each block is one task that builds the plane-wave model and diagonalises its k-points
(:func:`bandpert.planewave.solver.exact_energies`, one BLAS thread). The blocks come back in
order, so the energies, and hence the DOS, do not depend on how many workers ran them.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from ..crystal.kmesh import KMesh, reciprocal_mesh
from ..errors import InputError
from ..input.material import Material
from ..physics.bands import choose_energy_zero, default_bands
from ..physics.dos import (
    DEFAULT_SMEARING_EV,
    SPIN_DEGENERACY,
    DensityOfStates,
    fermi_level_from_count,
    gaussian_dos,
    tetrahedron_dos,
)
from ..physics.reduced_basis import ReducedBasisSettings
from ..physics.reduced_basis_check import InterpolatedBands, interpolated_bands
from ..planewave.cutoff import choose_cutoff
from ..planewave.model import KCentredModel, build_k_centred_model
from ..planewave.solver import exact_energies, single_blas_thread
from ..runs.execution import SERIAL, Engine, Progress, Runner, run, session

DOS_METHODS = ("tetrahedron", "gaussian")

#: k-points per task when the engine is distributed (about 0.1–0.3 s of work at ~250 plane waves).
K_BLOCK = 64


#: The last model built in this process, keyed by what defines it: every block of a mesh needs
#: the same V, so a worker (or the calling process) builds it once, not once per block.
_LAST_MODEL: dict[tuple, KCentredModel] = {}


def _model_for(material: Material, cutoff_eV: float) -> KCentredModel:
    """The model with a basis centred on each k (the same bases in every process)."""
    key = (material.file, material.name, material.vectors_A.tobytes(), repr(material.atoms),
           repr(material.potential), float(cutoff_eV))
    if key not in _LAST_MODEL:
        _LAST_MODEL.clear()
        _LAST_MODEL[key] = build_k_centred_model(material, cutoff_eV)
    return _LAST_MODEL[key]


def mesh_block(task: tuple[Material, float, np.ndarray, int]) -> np.ndarray:
    """One task: exact energies (n_k, n_bands) of a block of Cartesian k-points (Å⁻¹)."""
    material, cutoff_eV, k_cart_invA, n_bands = task
    return exact_energies(_model_for(material, cutoff_eV), k_cart_invA, n_bands)


def mesh_energies(material: Material, mesh: KMesh, cutoff_eV: float, n_bands: int,
                  engine: Engine | Runner = SERIAL, progress: Progress | None = None,
                  block_size: int = K_BLOCK) -> np.ndarray:
    """Exact band energies on the irreducible points of a mesh, (n_irr, n_bands), in eV.

    Raises
    ------
    RuntimeError
        If a block failed: a density of states with missing k-points would be wrong, so no
        partial result is returned (the message names the block and the reason).
    """
    k = mesh.k_cart_invA
    starts = range(0, len(k), block_size)
    tasks = [(material, cutoff_eV, k[s:s + block_size], n_bands) for s in starts]
    outcomes = run(mesh_block, tasks, engine, progress=None if progress is None else
                   (lambda done, total: progress(min(len(k), done * block_size), len(k))),
                   block_size=1)
    for s, outcome in zip(starts, outcomes, strict=True):
        if not outcome.ok:
            if outcome.user_error:
                raise InputError(outcome.error)
            raise RuntimeError(f"k-points {s}–{min(len(k), s + block_size) - 1} of the mesh "
                               f"failed: {outcome.error}")
    return np.concatenate([o.value for o in outcomes], axis=0)


def dos_band_block(task: tuple[KMesh, np.ndarray, np.ndarray, str, float]
                   ) -> tuple[np.ndarray, np.ndarray]:
    """One task: (DOS, integrated count) of a group of bands on the energy grid."""
    mesh, energies_eV, grid_eV, method, smearing_eV = task
    with single_blas_thread():
        if method == "tetrahedron":
            d = tetrahedron_dos(mesh, energies_eV, grid_eV)
        else:
            d = gaussian_dos(energies_eV, mesh.weights, grid_eV, smearing_eV)
    return d.dos_per_eV, d.integrated


def band_resolved_dos(mesh: KMesh, energies_eV: np.ndarray, grid_eV: np.ndarray, method: str,
                      smearing_eV: float, engine: Engine | Runner = SERIAL
                      ) -> DensityOfStates:
    """The DOS as a sum over bands, one band per task on the engine.

    The DOS and the count are sums over bands (both integration methods treat each band on
    its own), so each band is integrated where the engine puts it and the parts are added in
    band order: the same numbers whatever ran them.
    """
    tasks = [(mesh, energies_eV[:, b:b + 1], grid_eV, method, smearing_eV)
             for b in range(energies_eV.shape[1])]
    outcomes = run(dos_band_block, tasks, engine, block_size=1)
    dos = np.zeros(len(grid_eV))
    count = np.zeros(len(grid_eV))
    for b, outcome in enumerate(outcomes):
        if not outcome.ok:
            if outcome.user_error:
                raise InputError(outcome.error)
            raise RuntimeError(f"the DOS of band {b + 1} failed: {outcome.error}")
        dos += outcome.value[0]
        count += outcome.value[1]
    return DensityOfStates(grid_eV, dos, count, method,
                           smearing_eV if method == "gaussian" else None)


@dataclass(frozen=True)
class DosResult:
    """The density of states of a material on a uniform mesh.

    Attributes
    ----------
    material : Material
    mesh : KMesh
    cutoff_eV : float
    basis_size : int
    energies_eV : numpy.ndarray
        (n_irr, n_bands) absolute energies on ``mesh.k_frac``.
    dos : DensityOfStates
        Absolute energy grid; states per eV per cell, both spins.
    complete_below_eV : float
        The lowest energy of the highest computed band: above it bands are missing, so the
        energy grid stops there.
    fermi_level_eV : float or None
        From the electron count (None without ``electrons.valence``); mid-gap for an insulator.
    valence_max_eV, conduction_min_eV : float or None
        Band edges on the mesh when the occupied bands lie wholly below the empty ones.
    energy_zero_eV : float
    energy_zero_kind : str
        "valence-band maximum", "Fermi level" or "absolute".
    engine : str
    interpolation : InterpolatedBands or None
        The reduced-basis interpolation that gave ``energies_eV`` (its check included); None
        when every point was diagonalised exactly.
    """

    material: Material
    mesh: KMesh
    cutoff_eV: float
    basis_size: int
    energies_eV: np.ndarray
    dos: DensityOfStates
    complete_below_eV: float
    fermi_level_eV: float | None
    valence_max_eV: float | None
    conduction_min_eV: float | None
    energy_zero_eV: float
    energy_zero_kind: str
    engine: str
    interpolation: InterpolatedBands | None = None

    @property
    def gap_eV(self) -> float | None:
        """Gap on the mesh (None for a metal)."""
        if self.valence_max_eV is None:
            return None
        return self.conduction_min_eV - self.valence_max_eV


def compute_dos(material: Material, n_per_axis: int | tuple[int, ...],
                method: str = "tetrahedron", smearing_eV: float = DEFAULT_SMEARING_EV,
                n_bands: int | None = None, cutoff_eV: float | None = None,
                energy_step_eV: float = 0.01, engine: Engine = SERIAL,
                progress: Progress | None = None,
                interpolation: ReducedBasisSettings | None = None) -> DosResult:
    """Density of states and Fermi level of a plane-wave model on a Γ-centred mesh.

    Parameters
    ----------
    material : Material
    n_per_axis : int or tuple of int
        Mesh points per reciprocal axis.
    method : str
        "tetrahedron" (linear tetrahedra; Blöchl, Jepsen & Andersen, Phys. Rev. B 49, 16223
        (1994)) or "gaussian" (broadening ``smearing_eV``).
    smearing_eV : float
        Gaussian width (``method="gaussian"``; also the fallback width nowhere else).
    n_bands : int, optional
        Bands computed (default :func:`~bandpert.physics.bands.default_bands`).
    cutoff_eV : float, optional
        Plane-wave cutoff (default: the file's, else converged).
    energy_step_eV : float
        Spacing of the energy grid.
    engine : Engine
        Where the diagonalisations run (:mod:`bandpert.execution`).
    progress : callable, optional
        ``progress(done, total)`` in k-points.
    interpolation : ReducedBasisSettings, optional
        Interpolate the bands from reduced bases
        (:func:`~bandpert.physics.reduced_basis_check.interpolated_bands`, in this process, with its
        check against exact bands) instead of diagonalising every point exactly.

    Returns
    -------
    DosResult
    """
    if method not in DOS_METHODS:
        raise InputError(f"unknown method '{method}'; expected {', '.join(DOS_METHODS)}",
                         material.file, "method")
    if not energy_step_eV > 0:
        raise InputError(f"must be positive, got {energy_step_eV}", material.file,
                         "energy_step_eV")
    nb = n_bands or default_bands(material)
    g = material.electrons_per_band
    # the cutoff rule converges the spinless bands (as for the band structure)
    cutoff = choose_cutoff(material.local_spinless(), -(-nb * g // 2), cutoff_eV)
    model = _model_for(material, cutoff)  # fails here, once, on a bad basis
    states = model.n_components * model.size
    if nb > states:
        raise InputError(f"{nb} bands asked for but the basis holds only {states} states",
                         material.file, "n_bands")
    if interpolation is not None:
        interpolation.checked()
    mesh = reciprocal_mesh(material, n_per_axis)
    interpolated = None
    with session(engine) as runner:  # one cluster for the bands and the DOS
        if interpolation is None:
            energies = mesh_energies(material, mesh, cutoff, nb, runner, progress)
        else:
            interpolated = interpolated_bands(material, mesh.k_cart_invA, nb, cutoff,
                                              interpolation)
            energies = interpolated.energies_eV
        top = float(energies[:, -1].min())
        lo = float(energies.min()) - 0.5
        grid = np.arange(lo, top + 0.5 * energy_step_eV, energy_step_eV)
        dos = band_resolved_dos(mesh, energies, grid, method, smearing_eV, runner)
    if g != SPIN_DEGENERACY:  # spinor bands hold one electron each
        dos = dataclasses.replace(dos, dos_per_eV=dos.dos_per_eV * g / SPIN_DEGENERACY,
                                  integrated=dos.integrated * g / SPIN_DEGENERACY)
    # the DOS routines count two electrons per band: spinor bands take twice their electrons
    n_el = (None if material.valence_electrons is None
            else material.valence_electrons * SPIN_DEGENERACY // g)
    e_f = None
    if n_el is not None:
        e_f = fermi_level_from_count(mesh, energies, n_el, method=method,
                                     smearing_eV=smearing_eV)
    zero, kind, edges = choose_energy_zero(energies, n_el, lambda: e_f)
    vbm = None if edges is None else edges.valence_max_eV
    cbm = None if edges is None else edges.conduction_min_eV
    return DosResult(material=material, mesh=mesh, cutoff_eV=float(cutoff),
                     basis_size=model.size, energies_eV=energies, dos=dos,
                     complete_below_eV=top, fermi_level_eV=e_f, valence_max_eV=vbm,
                     conduction_min_eV=cbm, energy_zero_eV=float(zero), energy_zero_kind=kind,
                     engine=engine.describe(), interpolation=interpolated)
