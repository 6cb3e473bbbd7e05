"""Direct and reciprocal cells, crystal symmetry (spglib) and labelled k-paths.

3D paths are the standard paths of Hinuma, Pizzi, Kumagai, Oba & Tanaka,
Comput. Mater. Sci. 128, 140 (2017), obtained through seekpath in the coordinates of the cell the
user gave. 1D and 2D paths are bandpert's own: chain Γ–X; square Γ–X–M–Γ; rectangular and
oblique Γ–X–S–Y–Γ; hexagonal-2d Γ–M–K–Γ.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import seekpath
import spglib

from ..errors import InputError
from ..input.material import Material, canonical_label


def reciprocal_vectors(vectors_A: np.ndarray) -> np.ndarray:
    """Reciprocal primitive vectors b_i (rows, Å⁻¹) with a_i · b_j = 2π δ_ij.

    Parameters
    ----------
    vectors_A : numpy.ndarray
        Direct primitive vectors as rows, shape (d, d), in Å.

    Returns
    -------
    numpy.ndarray
        B = 2π (A⁻¹)ᵀ, shape (d, d), in Å⁻¹ (Ashcroft & Mermin, Solid State Physics, eq. 5.3).
    """
    return 2.0 * np.pi * np.linalg.inv(np.asarray(vectors_A, dtype=float)).T


@dataclass(frozen=True)
class Symmetry:
    """Space group found by spglib (3D only; None fields otherwise)."""

    number: int | None
    international: str | None
    has_inversion: bool | None


def spglib_cell(material: Material) -> tuple[np.ndarray, np.ndarray, list[int]]:
    """The one cell handed to spglib and seekpath: (lattice rows Å, fractional positions, types).

    Species are numbered 1, 2, … in alphabetical order of their names; only which atoms share a
    number matters to spglib (Togo & Tanaka, arXiv:1808.01590 (2018)).
    """
    names = sorted({a.species for a in material.atoms})
    return (np.asarray(material.vectors_A, dtype=float),
            np.array([a.position_frac for a in material.atoms], dtype=float),
            [names.index(a.species) + 1 for a in material.atoms])


def crystal_symmetry(material: Material, symprec: float = 1e-5) -> Symmetry:
    """Space group of a 3D crystal from spglib (Togo & Tanaka, arXiv:1808.01590 (2018)).

    Parameters
    ----------
    material : Material
        The crystal.
    symprec : float
        Distance tolerance in Å.

    Returns
    -------
    Symmetry
        For 1D and 2D materials every field is None.
    """
    if material.dimension != 3:
        return Symmetry(None, None, None)
    data = spglib.get_symmetry_dataset(spglib_cell(material), symprec=symprec)
    if data is None:
        return Symmetry(None, None, None)
    rotations = np.asarray(data.rotations)
    inversion = bool(np.any(np.all(rotations == -np.eye(3, dtype=int), axis=(1, 2))))
    return Symmetry(int(data.number), str(data.international), inversion)


_OWN_PATHS: dict[str, tuple[dict[str, tuple[float, ...]], tuple[tuple[str, ...], ...]]] = {
    "chain": ({"Γ": (0.0,), "X": (0.5,)}, (("Γ", "X"),)),
    "square": ({"Γ": (0.0, 0.0), "X": (0.5, 0.0), "M": (0.5, 0.5)}, (("Γ", "X", "M", "Γ"),)),
    "rectangular": ({"Γ": (0.0, 0.0), "X": (0.5, 0.0), "S": (0.5, 0.5), "Y": (0.0, 0.5)},
                    (("Γ", "X", "S", "Y", "Γ"),)),
    "hexagonal-2d": ({"Γ": (0.0, 0.0), "M": (0.5, 0.0), "K": (1 / 3, 1 / 3)},
                     (("Γ", "M", "K", "Γ"),)),
}
_OWN_PATHS["oblique"] = _OWN_PATHS["rectangular"]


def standard_path(material: Material) -> tuple[dict[str, tuple[float, ...]],
                                               tuple[tuple[str, ...], ...]]:
    """Labelled high-symmetry points (fractional reciprocal coordinates) and legs.

    Parameters
    ----------
    material : Material
        The crystal; its own ``path`` is used when it has one.

    Returns
    -------
    points : dict
        Label → fractional coordinates in the reciprocal basis of ``material.vectors_A``.
    legs : tuple of tuple of str
        Continuous runs of labels; a jump separates consecutive legs.
    """
    if material.path is not None:
        return dict(material.path.points_frac), material.path.legs
    if material.dimension < 3:
        kind = material.lattice_type
        if kind == "vectors":
            kind = "chain" if material.dimension == 1 else "oblique"
        return _OWN_PATHS[kind]
    lattice, positions, types = spglib_cell(material)
    cell = (lattice.tolist(), positions.tolist(), types)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            found = seekpath.get_path_orig_cell(cell)
    except Exception as exc:  # seekpath raises several types for cells it cannot classify
        raise InputError(f"no standard k-path for this cell ({exc}); give one in [path]",
                         material.file, "path") from None
    points = {canonical_label(k): tuple(float(x) for x in v)
              for k, v in found["point_coords"].items()}
    legs: list[list[str]] = []
    for start, end in found["path"]:
        start, end = canonical_label(start), canonical_label(end)
        if legs and legs[-1][-1] == start:
            legs[-1].append(end)
        else:
            legs.append([start, end])
    return points, tuple(tuple(leg) for leg in legs)


@dataclass(frozen=True)
class KPath:
    """k-points along a labelled path, evenly spread in path length.

    Attributes
    ----------
    k_frac : numpy.ndarray
        (n_k, d) fractional coordinates in the reciprocal primitive basis.
    k_cart_invA : numpy.ndarray
        (n_k, d) Cartesian wave vectors in Å⁻¹ (2π included).
    distance_invA : numpy.ndarray
        (n_k,) cumulative path length in Å⁻¹; it does not advance across a jump between legs.
    label_indices : numpy.ndarray
        Indices into the k-points where a labelled point sits.
    labels : tuple of str
        The label at each of ``label_indices``; a jump reads ``"U|K"``.
    leg_starts : numpy.ndarray
        Index of the first k-point of each leg.
    points_frac : dict
        The labelled points used.
    """

    k_frac: np.ndarray
    k_cart_invA: np.ndarray
    distance_invA: np.ndarray
    label_indices: np.ndarray
    labels: tuple[str, ...]
    leg_starts: np.ndarray
    points_frac: dict[str, tuple[float, ...]]


def sample_path(reciprocal_invA: np.ndarray, points: dict[str, tuple[float, ...]],
                legs: tuple[tuple[str, ...], ...], n_k: int) -> KPath:
    """Spread about ``n_k`` k-points along the legs, evenly in Cartesian path length.

    Parameters
    ----------
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors as rows (Å⁻¹).
    points : dict
        Label → fractional coordinates.
    legs : tuple of tuple of str
        Continuous runs of labels.
    n_k : int
        Requested number of k-points (at least 2 per segment are always placed, and every
        labelled point is hit exactly).

    Returns
    -------
    KPath
    """
    b = np.asarray(reciprocal_invA, dtype=float)
    segments = [(leg[i], leg[i + 1]) for leg in legs for i in range(len(leg) - 1)]
    lengths = [float(np.linalg.norm((np.subtract(points[e], points[s])) @ b)) for s, e in segments]
    total = sum(lengths)
    if total <= 0:
        raise InputError("the k-path has zero length", key="path")
    n_intervals = max(n_k - len(legs), len(segments))
    frac_parts, dist_parts, label_idx, labels, leg_starts = [], [], [], [], []
    x0, count, seg = 0.0, 0, 0
    for leg in legs:
        leg_starts.append(count)
        if labels and count == label_idx[-1] + 1:
            labels[-1] = f"{labels[-1]}|{leg[0]}"
        else:
            label_idx.append(count)
            labels.append(leg[0])
        for i in range(len(leg) - 1):
            length = lengths[seg]
            seg += 1
            m = max(1, int(round(n_intervals * length / total)))
            t = np.arange(0 if i == 0 else 1, m + 1) / m
            start, end = np.array(points[leg[i]]), np.array(points[leg[i + 1]])
            frac_parts.append(start + t[:, None] * (end - start))
            dist_parts.append(x0 + t * length)
            count += len(t)
            x0 += length
            label_idx.append(count - 1)
            labels.append(leg[i + 1])
    # the first point of a new leg shares the distance of the previous leg's end (x0 does not
    # advance across a jump), so the plot draws the two labels at one position as "U|K"
    k_frac = np.concatenate(frac_parts)
    return KPath(k_frac=k_frac, k_cart_invA=k_frac @ b, distance_invA=np.concatenate(dist_parts),
                 label_indices=np.array(label_idx), labels=tuple(labels),
                 leg_starts=np.array(leg_starts), points_frac=dict(points))


def describe_position(path: KPath, index: int) -> str:
    """Where k-point ``index`` sits: a label, or e.g. ``"0.86 of Γ→X"`` along its segment."""
    idx = list(path.label_indices)
    if index in idx:
        return path.labels[idx.index(index)]
    after = int(np.searchsorted(path.label_indices, index))
    i0, i1 = path.label_indices[after - 1], path.label_indices[after]
    start = path.labels[after - 1].split("|")[-1]
    end = path.labels[after].split("|")[0]
    d = path.distance_invA
    frac = (d[index] - d[i0]) / (d[i1] - d[i0])
    return f"{frac:.2f} of {start}→{end}"


def point_group_rotations(material: Material, symprec: float = 1e-5) -> np.ndarray | None:
    """Rotations of the crystal's space group (spglib, fractional direct coordinates), 3D only."""
    if material.dimension != 3:
        return None
    data = spglib.get_symmetry_dataset(spglib_cell(material), symprec=symprec)
    return None if data is None else np.asarray(data.rotations)
