"""The one k-mesh of bandpert: Γ-centred uniform meshes, reduced by symmetry in 3D.

The mesh is Γ-centred, with points k = (i0/n0, i1/n1, i2/n2) in fractions of the reciprocal
primitive vectors. In 3D it is reduced by the crystal's point group and time reversal (spglib, on
the one cell of :func:`bandpert.crystal.lattice.spglib_cell`); :class:`KMesh` keeps the map from
every point of the full grid to its irreducible point, so that energies computed on the
irreducible points unfold onto the full grid (for the tetrahedra).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
import spglib

from ..errors import InputError
from ..input.material import Material
from .lattice import reciprocal_vectors, spglib_cell

#: Largest full grid (points) a mesh may have: checked on the requested shape before spglib or
#: any array is allocated.
MAX_MESH_POINTS = 1_000_000

#: Bytes held per full-grid point while one band is integrated by tetrahedra (6 tetrahedra of 4
#: corner indices and 4 corner energies, 8 bytes each).
MESH_BYTES_PER_POINT = 6 * 4 * 8 * 2


@dataclass(frozen=True)
class KMesh:
    """A Γ-centred uniform k-mesh and its irreducible points.

    Attributes
    ----------
    shape : tuple of int
        Points per reciprocal axis, length d (1, 2 or 3).
    k_frac : numpy.ndarray
        (n_irr, d) irreducible points in fractions of the reciprocal primitive vectors.
    weights : numpy.ndarray
        (n_irr,) weights summing to 1: the fraction of full-grid points each one stands for.
    full_to_irreducible : numpy.ndarray
        (N_full,) index into ``k_frac`` of every point of the full grid. The full grid is in C
        order: point (i0, i1, i2), at k_frac = (i0/n0, i1/n1, i2/n2), has index
        i0·n1·n2 + i1·n2 + i2 (see :attr:`full_k_frac`).
    reciprocal_invA : numpy.ndarray
        (d, d) reciprocal primitive vectors as rows (Å⁻¹). The tetrahedron method needs them to
        choose the shortest diagonal of each grid cell in Cartesian space.
    """

    shape: tuple[int, ...]
    k_frac: np.ndarray
    weights: np.ndarray
    full_to_irreducible: np.ndarray
    reciprocal_invA: np.ndarray

    @property
    def n_full(self) -> int:
        """Number of points of the full grid, n0·n1·n2."""
        return int(np.prod(self.shape))

    @property
    def dimension(self) -> int:
        """Dimension d of the mesh."""
        return len(self.shape)

    @property
    def full_k_frac(self) -> np.ndarray:
        """(N_full, d) fractional coordinates of the full grid, in C order, in [0, 1)."""
        return full_grid_frac(self.shape)

    @property
    def k_cart_invA(self) -> np.ndarray:
        """(n_irr, d) Cartesian irreducible points (Å⁻¹, 2π included)."""
        return self.k_frac @ self.reciprocal_invA

    def unfold(self, energies_eV: np.ndarray) -> np.ndarray:
        """Energies on the irreducible points, (n_irr, n_bands), spread onto the full grid."""
        return np.asarray(energies_eV)[self.full_to_irreducible]


def full_grid_frac(shape: tuple[int, ...]) -> np.ndarray:
    """Fractional coordinates (i0/n0, i1/n1, …) of a Γ-centred grid, C order (last index fastest).

    Parameters
    ----------
    shape : tuple of int
        Points per axis.

    Returns
    -------
    numpy.ndarray
        (n0·n1·…, d) coordinates in [0, 1).
    """
    axes = [np.arange(n) / n for n in shape]
    return np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, len(shape))


def fold_to_first_zone(k_frac: np.ndarray, reciprocal_invA: np.ndarray) -> np.ndarray:
    """The image k + G of each point with the shortest Cartesian length (first Brillouin zone).

    With a basis centred on each k (:class:`bandpert.planewave.model.KCentredModel`) the energies
    are periodic in k to rounding; the images nearest Γ keep |k| small, and with it the set of
    plane waves the k-centred bases draw from (and a fixed Γ-centred basis is most accurate
    there). Images k + m with m ∈ {−1, 0, 1}^d are
    compared (enough for points first reduced to [−½, ½)^d on a primitive cell that is not
    extremely oblique); ties keep the first image found, in the order of m.

    Parameters
    ----------
    k_frac : numpy.ndarray
        (n, d) fractional coordinates.
    reciprocal_invA : numpy.ndarray
        (d, d) reciprocal primitive vectors as rows (Å⁻¹).

    Returns
    -------
    numpy.ndarray
        (n, d) fractional coordinates of the shortest images.
    """
    k = np.asarray(k_frac, dtype=float)
    d = k.shape[1]
    k = k - np.floor(k + 0.5)  # into [−½, ½)
    shifts = np.array(list(itertools.product((0, -1, 1), repeat=d)), dtype=float)
    images = k[:, None, :] + shifts[None, :, :]
    length = np.linalg.norm(images @ reciprocal_invA, axis=-1)
    # lengths equal to rounding (a zone-boundary point) tie: argmin keeps the first (m = 0 first)
    best = np.argmin(np.round(length, 10), axis=1)
    return images[np.arange(len(k)), best]


def _mesh_shape(material: Material, n_per_axis: int | tuple[int, ...]) -> tuple[int, ...]:
    d = material.dimension
    values = (n_per_axis,) * d if isinstance(n_per_axis, int | np.integer) else n_per_axis
    try:
        values = tuple(values)
    except TypeError:
        raise InputError(f"got {n_per_axis!r}; expected an integer or {d} integers (points per "
                         "reciprocal axis)", material.file, "mesh") from None
    if len(values) != d:
        raise InputError(f"got {len(values)} numbers for a {d}-dimensional crystal; expected one "
                         f"integer or {d}", material.file, "mesh")
    for n in values:
        if isinstance(n, bool) or not isinstance(n, int | np.integer):
            raise InputError(f"got {n!r}; expected whole numbers of points per axis",
                             material.file, "mesh")
        if n < 2:
            raise InputError(f"got {n} points on an axis; expected at least 2 (a mesh of one "
                             "point has no cells for the tetrahedra)", material.file, "mesh")
    total = float(np.prod([float(n) for n in values]))
    if total > MAX_MESH_POINTS:
        raise InputError(f"a mesh of {' × '.join(str(int(n)) for n in values)} = {total:.3g} "
                         f"points; expected at most {MAX_MESH_POINTS:.0e} (about "
                         f"{MAX_MESH_POINTS * MESH_BYTES_PER_POINT / 2**30:.1f} GiB of tetrahedra "
                         "per band)", material.file, "mesh")
    return tuple(int(n) for n in values)


def reciprocal_mesh(material: Material, n_per_axis: int | tuple[int, ...],
                    reduce_by_symmetry: bool = True) -> KMesh:
    """Γ-centred uniform mesh, reduced by symmetry in 3D.

    In 3D the irreducible points come from ``spglib.get_ir_reciprocal_mesh`` (A. Togo and
    I. Tanaka, arXiv:1808.01590 (2018)) with no shift, for the cell the material file gives
    (:func:`~bandpert.crystal.lattice.spglib_cell`); spglib orders its grid with the first index
    fastest, which is converted here to the C order of :class:`KMesh`. In 1D and 2D every point
    is its own irreducible point.

    Parameters
    ----------
    material : Material
    n_per_axis : int or tuple of int
        Points per reciprocal axis (one number for all axes, or one per axis); each at least 2.
    reduce_by_symmetry : bool
        False keeps every point of the full grid (each its own irreducible point).

    Returns
    -------
    KMesh

    Raises
    ------
    InputError
        With key ``--mesh`` for a mesh that is not 1–3 integers ≥ 2 matching the dimension.
    """
    shape = _mesh_shape(material, n_per_axis)
    b = reciprocal_vectors(material.vectors_A)
    n_full = int(np.prod(shape))
    if material.dimension != 3 or not reduce_by_symmetry:
        return KMesh(shape, fold_to_first_zone(full_grid_frac(shape), b),
                     np.full(n_full, 1.0 / n_full), np.arange(n_full), b)
    mapping, grid = spglib.get_ir_reciprocal_mesh(list(shape), spglib_cell(material),
                                                  is_shift=[0, 0, 0])
    mapping = np.asarray(mapping, dtype=np.int64)
    grid = np.asarray(grid, dtype=np.int64)
    n = np.array(shape)
    # spglib point s has address grid[s] (first index fastest, components possibly negative);
    # its C-order index follows from the address itself, which is safer than assuming a layout
    wrapped = np.mod(grid, n)
    c_index = (wrapped[:, 0] * n[1] + wrapped[:, 1]) * n[2] + wrapped[:, 2]
    irreducible, position, counts = np.unique(mapping, return_inverse=True, return_counts=True)
    full_to_irr = np.empty(n_full, dtype=np.int64)
    full_to_irr[c_index] = position.ravel()
    return KMesh(shape, fold_to_first_zone(grid[irreducible] / n, b), counts / n_full,
                 full_to_irr, b)
