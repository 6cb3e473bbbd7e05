"""Space-group operations of a crystal, the little group of k and its irreducible representations.

The operations come from spglib (Togo & Tanaka, arXiv:1808.01590 (2018)) on the one cell of
:func:`bandpert.crystal.lattice.spglib_cell`; the small representations of the little group
from spgrep (Togo & Shinohara, spgrep, J. Open Source Softw. 8, 5269 (2023)), whose
convention is D({E|t}) = exp(−i k·t) 1, i.e. operators act on functions as
(g f)(r) = f(g⁻¹ r). Labels of levels on a zone face depend on the origin of the cell (the
phases exp(−i k·t) of the nonsymmorphic operations do), so the operations are written in a
*canonical frame*: origin at an inversion centre, on an atom when one is an inversion centre
(fcc metals) and at the bond centre otherwise (diamond); without inversion, on a chosen atom
(zincblende: the atom is named in every result). The physical operations are the same in every
frame; only their Seitz labels {R|t} change.

Time reversal (spinless, θ² = +1) is judged by Herring's test (Herring, Phys. Rev. 52, 361
(1937); Bradley & Cracknell, *The Mathematical Theory of Symmetry in Solids*, 1972, eq. 7.3.?
— from memory): Σ χ(g²) over the coset representatives g with g k ≡ −k, divided by the order
of the little co-group, is +1 (no extra degeneracy), 0 (the irrep sticks to a different one)
or −1 (the irrep appears twice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import spglib
from spgrep import get_spacegroup_irreps_from_primitive_symmetry

from ..crystal.lattice import spglib_cell
from ..input.material import Material

__all__ = ["LittleGroup", "SpaceGroupFrame", "little_group", "space_group_frame"]

#: Tolerance on fractional coordinates and characters.
ATOL: float = 1e-6


@dataclass(frozen=True)
class SpaceGroupFrame:
    """The space-group operations {W|w} of a crystal, in the user's and the canonical frame.

    Attributes
    ----------
    number : int or None
        International space-group number (None: no symmetry could be determined).
    international : str
    rotations : numpy.ndarray
        (n, 3, 3) integer W acting on fractional direct coordinates, x′ = W x + w.
    translations_user : numpy.ndarray
        (n, 3) w in the user's frame such that the same physical operation has
        ``translations`` in the canonical frame (not reduced modulo 1).
    translations : numpy.ndarray
        (n, 3) w in the canonical frame, in [0, 1).
    rotations_cart : numpy.ndarray
        (n, 3, 3) Cartesian rotation matrices.
    origin_frac : numpy.ndarray
        (3,) the canonical origin in the user's fractional coordinates.
    origin : str
        Words: ``"inversion centre at an atom (Al)"``, ``"bond centre (inversion centre)"``,
        ``"atom Ga"`` …
    primitive : bool
        False when the cell holds pure translations (a supercell): not labelled.
    lattice_t : numpy.ndarray
        (3, 3) Aᵀ (lattice vectors as columns, Å): Cartesian k ∝ k_frac @ inv(Aᵀ).
    """

    number: int | None
    international: str
    rotations: np.ndarray
    translations_user: np.ndarray
    translations: np.ndarray
    rotations_cart: np.ndarray
    origin_frac: np.ndarray
    origin: str
    primitive: bool
    lattice_t: np.ndarray

    @property
    def order(self) -> int:
        """Number of operations modulo lattice translations."""
        return int(self.rotations.shape[0])


def space_group_frame(material: Material, origin_atom: int | None = None,
                      symprec: float = 1e-5) -> SpaceGroupFrame:
    """The crystal's operations from spglib, moved to the canonical frame (module docstring).

    Parameters
    ----------
    material : Material
        A 3D crystal.
    origin_atom : int, optional
        Index of the atom put at the origin when the crystal has no inversion (default the
        first atom of the file). Ignored for centrosymmetric crystals.
    symprec : float
        spglib's distance tolerance (Å).

    Returns
    -------
    SpaceGroupFrame
    """
    lattice, positions, numbers = spglib_cell(material)
    data = spglib.get_symmetry_dataset((lattice, positions, numbers), symprec=symprec)
    if data is None:
        W = np.eye(3, dtype=int)[None]  # spglib found nothing: translations only
        w = np.zeros((1, 3))
        number, name = None, "P1"
    else:
        W = np.asarray(data.rotations, dtype=int)
        w = np.asarray(data.translations, dtype=float)
        number, name = int(data.number), str(data.international)
    identity = np.all(W == np.eye(3, dtype=int), axis=(1, 2))
    pure = identity & np.any(np.abs(w - np.rint(w)) > ATOL, axis=1)
    origin, words = _canonical_origin(material, W, w, positions, origin_atom)
    shift = np.einsum("nij,j->ni", W, origin) - origin  # (W − 1) s
    w_c = w + shift
    lattice_part = np.floor(w_c + ATOL)
    w_c -= lattice_part
    w_c[np.abs(w_c) < ATOL] = 0.0
    a_t = lattice.T
    cart = np.einsum("ij,njk,kl->nil", a_t, W, np.linalg.inv(a_t))
    return SpaceGroupFrame(number=number, international=name, rotations=W,
                           translations_user=w - lattice_part, translations=w_c,
                           rotations_cart=cart, origin_frac=origin, origin=words,
                           primitive=not bool(pure.any()), lattice_t=a_t)


def _canonical_origin(material: Material, W: np.ndarray, w: np.ndarray, positions: np.ndarray,
                      origin_atom: int | None) -> tuple[np.ndarray, str]:
    """Canonical origin (user fractions) and its description."""
    inversion = np.flatnonzero(np.all(W == -np.eye(3, dtype=int), axis=(1, 2)))
    species = [a.species for a in material.atoms]
    if inversion.size:
        w_i = w[inversion[0]]
        for j, x in enumerate(positions):  # an atom that is an inversion centre: 2x ≡ w
            d = 2 * x - w_i
            if np.allclose(d, np.rint(d), atol=ATOL):
                return x.copy(), f"inversion centre at an atom ({species[j]})"
        if len(positions) == 2:
            mid = positions.mean(axis=0)
            d = 2 * mid - w_i
            if np.allclose(d, np.rint(d), atol=ATOL):
                return mid, "bond centre (inversion centre)"
        return w_i / 2.0, "inversion centre"
    j = 0 if origin_atom is None else int(origin_atom)
    return positions[j].copy(), f"atom {species[j]}"


@dataclass(frozen=True)
class LittleGroup:
    """The little group of k (modulo translations) and its small irreducible representations.

    Attributes
    ----------
    k_frac : numpy.ndarray
        (3,) k in fractions of the reciprocal primitive vectors.
    indices : numpy.ndarray
        (m,) indices into the frame's operations of the little group's coset representatives.
    irreps : tuple of numpy.ndarray
        Per irrep, (m, d, d) matrices of the canonical-frame operations (spgrep).
    characters : numpy.ndarray
        (n_irreps, m) complex characters.
    dimensions : numpy.ndarray
        (n_irreps,) dimensions.
    herring : numpy.ndarray
        (n_irreps,) Herring's indicator +1, 0 or −1 (spinless time reversal).
    """

    k_frac: np.ndarray
    indices: np.ndarray
    irreps: tuple[np.ndarray, ...]
    characters: np.ndarray
    dimensions: np.ndarray
    herring: np.ndarray

    @property
    def order(self) -> int:
        """Order of the little co-group."""
        return int(self.indices.size)


def little_group(frame: SpaceGroupFrame, k_frac: np.ndarray) -> LittleGroup:
    """Small irreps of the little group of k (spgrep) with Herring's time-reversal indicator.

    Parameters
    ----------
    frame : SpaceGroupFrame
        A primitive cell's operations (``frame.primitive``).
    k_frac : numpy.ndarray
        (3,) k in fractions of the reciprocal primitive vectors.

    Returns
    -------
    LittleGroup
    """
    k = np.asarray(k_frac, dtype=float)
    irreps, mapping = get_spacegroup_irreps_from_primitive_symmetry(
        frame.rotations, frame.translations, k)
    mapping = np.asarray(mapping, dtype=int)
    chars = np.array([[np.trace(m) for m in ir] for ir in irreps], dtype=complex)
    dims = np.array([ir.shape[1] for ir in irreps], dtype=int)
    herring = _herring(frame, k, mapping, chars)
    return LittleGroup(k_frac=k, indices=mapping, irreps=tuple(irreps), characters=chars,
                       dimensions=dims, herring=herring)


def _herring(frame: SpaceGroupFrame, k: np.ndarray, mapping: np.ndarray, chars: np.ndarray
             ) -> np.ndarray:
    """Herring's sum (1/|G_k/T|) Σ_{g: g k ≡ −k} χ(g²) for each irrep (module docstring).

    g² = {W²|W w + w} is written as {E|T}{W_j|w_j} with {W_j|w_j} a little-group
    representative, so χ(g²) = exp(−2πi k·T) χ(j).
    """
    W, w = frame.rotations, frame.translations
    total = np.zeros(chars.shape[0], dtype=complex)
    little_W = W[mapping].reshape(mapping.size, 9)
    kr = np.einsum("j,nji->ni", k, np.linalg.inv(W))  # every rotated k, as rows
    d = kr + k
    for n in np.flatnonzero(np.all(np.abs(d - np.rint(d)) < ATOL, axis=1)):
        w2 = W[n] @ w[n] + w[n]
        j = int(np.flatnonzero(np.all(little_W == (W[n] @ W[n]).ravel(), axis=1))[0])
        t = w2 - w[mapping[j]]
        total += np.exp(-2j * np.pi * (k @ t)) * chars[:, j]
    value = total.real / mapping.size
    return np.rint(value).astype(int)
