"""Exact bands: diagonalisation of H(k) = H0(k) + V by LAPACK, only the bands asked for.

Also the choices that make a band structure usable: a converged default cutoff, the energy zero
(valence-band maximum for a semiconductor, Fermi level for a metal) and the band edges.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.linalg.lapack

from ..crystal.lattice import (
    KPath,
    Symmetry,
    crystal_symmetry,
    reciprocal_vectors,
    sample_path,
    standard_path,
)
from ..errors import InputError
from ..input.material import Material
from ..perturbation import perturbative_levels
from ..physics.perturbative_bands import (
    Comparison,
    PerturbationSettings,
    PerturbativeBands,
    compare,
    perturbative_bands,
)
from ..planewave.model import PlaneWaveModel, build_model, single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2

#: Below this basis size the eigenvalues of a block of k-points come from one batched numpy call
#: (all eigenvalues, divide and conquer); above it, LAPACK's MRRR driver per k-point, only the
#: bands asked for. Measured crossover on the bundled materials (one BLAS thread, 200 k-points):
#: batched is 30 % faster at 65–89 plane waves and 5 % at 113, per-k MRRR 8 % faster at 169.
BATCH_BELOW = 128

#: Bytes of Hamiltonians held at once by the batched path (memory does not grow with n_k).
BATCH_BYTES = 16 * 2**20

#: Bands move by less than this when the default cutoff is raised by half (eV).
CONVERGENCE_TOLERANCE_EV = 0.005

Progress = Callable[[int, int], None]

def _mrrr_solver(n: int, n_bands: int, complex_: bool) -> Callable[[np.ndarray], np.ndarray]:
    """The LAPACK call ``scipy.linalg.eigh(..., subset_by_index, driver="evr")`` makes, bound once.

    Same routine, arguments and optimal workspace as scipy's wrapper (so the same numbers),
    without re-validating the arguments and querying the workspace at every k-point.
    """
    prefix = "he" if complex_ else "sy"
    drv, query = scipy.linalg.lapack.get_lapack_funcs(
        (prefix + "evr", prefix + "evr_lwork"), dtype=complex if complex_ else float)
    *sizes, info = query(n, lower=1)
    if info != 0:
        raise RuntimeError(f"LAPACK workspace query failed (info = {info})")
    names = ("lwork", "lrwork", "liwork") if complex_ else ("lwork", "liwork")
    work = {name: int(size.real) for name, size in zip(names, sizes, strict=True)}

    def solve(h: np.ndarray) -> np.ndarray:
        w, _, _, _, info = drv(h, compute_v=0, range="I", lower=1, il=1, iu=n_bands,
                               overwrite_a=1, **work)
        if info != 0:
            raise np.linalg.LinAlgError(f"LAPACK ?syevr/?heevr failed (info = {info})")
        return w[:n_bands]

    return solve


def exact_energies(model: PlaneWaveModel, k_cart_invA: np.ndarray, n_bands: int,
                   progress: Progress | None = None) -> np.ndarray:
    """Lowest ``n_bands`` eigenvalues of H(k) at each k-point, ascending.

    H(k) = H0(k) + V is assembled per k from the k-independent V; LAPACK's MRRR driver
    (``?syevr``/``?heevr``) computes only the requested eigenvalues. Bases below
    :data:`BATCH_BELOW` plane waves are diagonalised in blocks of k-points by one
    :func:`numpy.linalg.eigvalsh` call per block. BLAS runs on one thread
    (:func:`single_blas_thread`); the kinetic diagonal is built per block of k-points, so the
    memory beyond the (n_k, n_bands) result does not grow with the number of k-points.

    Parameters
    ----------
    model : PlaneWaveModel
    k_cart_invA : numpy.ndarray
        (n_k, d) Cartesian wave vectors (Å⁻¹).
    n_bands : int
        Number of bands; at most the basis size.
    progress : callable, optional
        Called as ``progress(done, total)``.

    Returns
    -------
    numpy.ndarray
        (n_k, n_bands) energies in eV (absolute: the model's own zero).
    """
    n = model.size
    if n_bands > n:
        raise InputError(f"{n_bands} bands asked for but the basis holds only {n} plane waves; "
                         "expected fewer bands or a larger cutoff", key="bands")
    k = np.atleast_2d(k_cart_invA)
    n_k = len(k)
    v = model.potential_eV
    out = np.empty((n_k, n_bands))
    diag = np.arange(n)
    block = max(1, min(n_k, BATCH_BYTES // (n * n * v.itemsize)))
    with single_blas_thread():
        if n < BATCH_BELOW:
            h = np.empty((block, n, n), dtype=v.dtype)
            for start in range(0, n_k, block):
                stop = min(n_k, start + block)
                hb = h[: stop - start]
                hb[:] = v
                hb[:, diag, diag] += model.kinetic_eV(k[start:stop])
                out[start:stop] = np.linalg.eigvalsh(hb)[:, :n_bands]
                if progress:
                    progress(stop, n_k)
            return out
        solve = _mrrr_solver(n, n_bands, np.iscomplexobj(v))
        v_f = np.asfortranarray(v)  # LAPACK's layout: no copy inside the wrapper
        h = np.empty_like(v_f)
        step = max(1, n_k // 50)
        for start in range(0, n_k, block):
            kinetic = model.kinetic_eV(k[start:start + block])
            for j, row in enumerate(kinetic):
                i = start + j
                np.copyto(h, v_f)
                h[diag, diag] += row
                out[i] = solve(h)
                if progress and (i % step == 0 or i == n_k - 1):
                    progress(i + 1, n_k)
    return out


def default_bands(material: Material) -> int:
    """Default number of bands: the file's ``basis.bands``, else the occupied bands plus four."""
    if material.n_bands is not None:
        return material.n_bands
    occupied = (material.valence_electrons or 8) // 2 + (material.valence_electrons or 8) % 2
    return occupied + 4


def _probe_points(material: Material) -> np.ndarray:
    """Labelled points and segment midpoints, Cartesian (Å⁻¹): where convergence is checked."""
    points, legs = standard_path(material)
    b = reciprocal_vectors(material.vectors_A)
    frac = [points[label] for leg in legs for label in leg]
    frac += [np.add(points[leg[i]], points[leg[i + 1]]) / 2 for leg in legs
             for i in range(len(leg) - 1)]
    return np.unique(np.round(np.array(frac, dtype=float), 12), axis=0) @ b


def converged_cutoff(material: Material, n_bands: int,
                     tolerance_eV: float = CONVERGENCE_TOLERANCE_EV) -> float:
    """Smallest cutoff (on a ×1.15 ladder) at which the bands move by < tolerance at ×1.5 cutoff.

    Ladder steps where the ×1.5 basis holds no more plane waves than the lower one are skipped.

    The check runs at the labelled points and segment midpoints of the path with 20 % margin
    (tolerance × 0.8), on absolute energies (stricter than after a shift of the zero).

    Parameters
    ----------
    material : Material
    n_bands : int
        The bands that must be converged.
    tolerance_eV : float
        Allowed change of any band at any probe point.

    Returns
    -------
    float
        The cutoff in eV.
    """
    k = _probe_points(material)
    b = reciprocal_vectors(material.vectors_A)
    # start where the basis holds twice the bands: the smallest |G| that does
    g_min = np.min(np.linalg.norm(b, axis=1))
    cutoff = HBAR2_OVER_2M0_EV_A2 * g_min**2 * max(1.0, (2 * n_bands) ** (2 / material.dimension)
                                                   / 4)
    for _ in range(60):
        low = build_model(material, cutoff)
        high = build_model(material, 1.5 * cutoff)
        # raising the cutoff by half must add plane waves, or the test would pass vacuously
        if high.size > low.size and low.size >= n_bands:
            diff = np.abs(exact_energies(low, k, n_bands) - exact_energies(high, k, n_bands))
            if diff.max() < 0.8 * tolerance_eV:
                return float(cutoff)
        cutoff *= 1.15
    raise InputError("no cutoff converged the bands within the basis limit; expected a "
                     "smoother potential or an explicit basis.cutoff_eV", material.file, "basis")


def warn_if_unconverged(material: Material, cutoff_eV: float, n_bands: int,
                        tolerance_eV: float = CONVERGENCE_TOLERANCE_EV) -> float:
    """Warn (:class:`~bandpert.errors.ModelWarning`) when a given cutoff is not converged.

    The bands at the labelled points and segment midpoints are compared with those at 1.5 ×
    the cutoff (or the next cutoff that adds plane waves, if that one adds none); the largest
    change (eV) is returned.
    """
    import warnings

    from ..errors import ModelWarning

    low = build_model(material, cutoff_eV)
    factor = 1.5
    high = build_model(material, factor * cutoff_eV)
    while high.size == low.size and factor < 10:  # a raise that adds nothing proves nothing
        factor *= 1.15
        high = build_model(material, factor * cutoff_eV)
    nb = min(n_bands, low.size)
    k = _probe_points(material)
    change = float(np.abs(exact_energies(low, k, nb) - exact_energies(high, k, nb)).max())
    if change >= tolerance_eV:
        warnings.warn(f"the bands move by {1e3 * change:.1f} meV when the cutoff of "
                      f"{cutoff_eV:.4g} eV is raised {factor:.2f}-fold: the basis is not "
                      "converged to "
                      f"{1e3 * tolerance_eV:g} meV (raise the cutoff, or leave it out for a "
                      "converged default)", ModelWarning, stacklevel=3)
    return change


def uniform_mesh(material: Material, n_per_axis: int) -> tuple[np.ndarray, np.ndarray]:
    """Γ-centred uniform k-mesh reduced by symmetry (spglib) in 3D, full in 1D/2D.

    Returns
    -------
    k_frac : numpy.ndarray
        (n, d) fractional coordinates of the irreducible points.
    weights : numpy.ndarray
        (n,) weights summing to 1.
    """
    d = material.dimension
    if d == 3:
        import spglib

        names = sorted({a.species for a in material.atoms})
        cell = (material.vectors_A, [a.position_frac for a in material.atoms],
                [names.index(a.species) for a in material.atoms])
        mapping, grid = spglib.get_ir_reciprocal_mesh([n_per_axis] * 3, cell, is_shift=[0, 0, 0])
        irr, counts = np.unique(mapping, return_counts=True)
        return grid[irr] / n_per_axis, counts / counts.sum()
    axes = [np.arange(n_per_axis) / n_per_axis] * d
    k = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, d)
    return k, np.full(len(k), 1.0 / len(k))


def fermi_level(energies_eV: np.ndarray, weights: np.ndarray, n_electrons: int,
                smearing_eV: float = 0.05) -> float:
    """Fermi level from an occupation count with Gaussian smearing (two spins per band).

    Solves Σ_k w_k Σ_n 2 · ½ erfc((E_nk − E_F)/σ) = N by bisection.

    Parameters
    ----------
    energies_eV : numpy.ndarray
        (n_k, n_bands) band energies on a mesh.
    weights : numpy.ndarray
        (n_k,) k-point weights summing to 1.
    n_electrons : int
        Electrons per primitive cell.
    smearing_eV : float
        Gaussian width σ.

    Returns
    -------
    float
    """
    from scipy.special import erfc

    if 2 * energies_eV.shape[1] < n_electrons + 2:
        raise InputError("too few bands on the mesh for the electron count", key="bands")
    lo, hi = energies_eV.min() - 1.0, energies_eV.max()
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        count = 2.0 * np.sum(weights[:, None] * 0.5 * erfc((energies_eV - mid) / smearing_eV))
        lo, hi = (mid, hi) if count < n_electrons else (lo, mid)
    return 0.5 * (lo + hi)


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
    energies_eV : numpy.ndarray or None
        (n_k, n_bands) exact absolute energies (the model's zero, V(G=0) as given); None when
        the exact diagonalisation was skipped.
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


def energy_reference(material: Material, path_energies_eV: np.ndarray,
                     mesh_energies: Callable[[np.ndarray, int], np.ndarray],
                     fermi_mesh: int | None = None) -> tuple[float, str, BandEdges | None]:
    """Energy zero for display: valence-band maximum, Fermi level, or none.

    With ``electrons.valence`` given and even, a gap on the path between the occupied and
    empty bands makes the crystal a semiconductor (zero at the valence maximum); otherwise it
    is a metal and the zero is the Fermi level on a uniform mesh (:func:`fermi_level`).

    Parameters
    ----------
    material : Material
    path_energies_eV : numpy.ndarray
        (n_k, n_bands) absolute energies on the path.
    mesh_energies : callable
        ``mesh_energies(k_cart_invA, n_bands)`` → (n_mesh, n_bands) energies on the mesh.
    fermi_mesh : int, optional
        Mesh points per axis (default 24 in 3D, 60 in 2D, 600 in 1D).

    Returns
    -------
    zero_eV, kind, edges
    """
    n_el = material.valence_electrons
    if n_el is None:
        return 0.0, "absolute", None
    edges = band_edges(path_energies_eV, n_el // 2) if n_el % 2 == 0 else None
    if edges is not None:
        return edges.valence_max_eV, "valence-band maximum", edges
    mesh = fermi_mesh or {1: 600, 2: 60, 3: 24}[material.dimension]
    k_frac, w = uniform_mesh(material, mesh)
    b = reciprocal_vectors(material.vectors_A)
    e_mesh = mesh_energies(k_frac @ b, n_el // 2 + 4)
    return fermi_level(e_mesh, w, n_el), "Fermi level", None


#: Most k-points along a path (a path of 1e6 points would take hours and gigabytes).
MAX_PATH_POINTS = 100_000


def compute_band_structure(material: Material, n_k: int = 200, n_bands: int | None = None,
                           cutoff_eV: float | None = None, fermi_mesh: int | None = None,
                           progress: Progress | None = None, exact: bool = True,
                           perturbation: PerturbationSettings | None = None,
                           check_cutoff: bool = True) -> BandStructure:
    """Material → bands along its standard (or custom) path: exact and/or perturbative.

    Parameters
    ----------
    material : Material
    n_k : int
        Number of k-points along the path (approximately; every label is hit).
    n_bands : int, optional
        Bands to compute; default :func:`default_bands`.
    cutoff_eV : float, optional
        Overrides the file's cutoff; without either, :func:`converged_cutoff` chooses one.
    fermi_mesh : int, optional
        k-points per axis of the uniform mesh for a metal's Fermi level.
    progress : callable, optional
        ``progress(done, total)`` for the path diagonalisation.
    exact : bool
        Diagonalise H(k) exactly (default). Without it the perturbative bands set the zero.
    perturbation : PerturbationSettings, optional
        Also compute perturbative bands (H0 = kinetic energy, V = crystal potential).
    check_cutoff : bool
        With a given cutoff, warn when it is not converged (:func:`warn_if_unconverged`,
        default). A sweep checks once at its reference point and switches it off per point.

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
    cutoff = cutoff_eV or material.cutoff_eV
    if cutoff is None:
        cutoff = converged_cutoff(material, nb)
    elif check_cutoff:
        warn_if_unconverged(material, cutoff, nb)
    model = build_model(material, cutoff)
    points, legs = standard_path(material)
    path = sample_path(model.reciprocal_invA, points, legs, n_k)
    energies = exact_energies(model, path.k_cart_invA, nb, progress) if exact else None
    pert = None
    if perturbation is not None:
        pert = perturbative_bands(model, path.k_cart_invA, nb, perturbation, path.label_indices)
        outside = pert.convergence_radius <= perturbation.lam
        if outside.any():
            import warnings

            from ..errors import ModelWarning

            warnings.warn(f"λ = {perturbation.lam:g} lies outside the convergence radius of the "
                          f"perturbation series on {100 * outside.mean():.0f} % of the sampled "
                          "(band, k) points: there the low-order result is not a convergent "
                          "expansion (see the validity map)", ModelWarning, stacklevel=2)

    def mesh_energies(k_cart: np.ndarray, n: int) -> np.ndarray:
        n = min(n, model.size)
        if exact:
            return exact_energies(model, k_cart, n)
        return perturbative_levels(model.kinetic_eV(k_cart), model.potential_eV, n,
                                   lam=perturbation.lam, order=perturbation.order,
                                   coupling_threshold=perturbation.coupling_threshold,
                                   estimate_error=False).energies

    reference = energies if energies is not None else pert.energies_eV
    zero, kind, edges = energy_reference(material, reference, mesh_energies, fermi_mesh)
    return BandStructure(material=material, symmetry=crystal_symmetry(material), path=path,
                         model=model, energies_eV=energies, energy_zero_eV=float(zero),
                         energy_zero_kind=kind, edges=edges, perturbative=pert,
                         comparison=None if (energies is None or pert is None)
                         else compare(energies, pert))
