"""Irreducible-representation labels of the levels at a k-point, from the plane-wave eigenvectors.

An operation g = {R|t} of the little group of k acts on a plane wave as
g e^{i(k+G)·r} = e^{−i R(k+G)·t} e^{i R(k+G)·r}, with (g f)(r) = f(g⁻¹ r); since R k = k + G_R,
R(k+G) = k + G′ is again in the basis {G : ħ²|k+G|²/2m0 ≤ cutoff} centred on k
(:func:`bandpert.planewave.model.centred_model`). On the eigenvectors U (columns) of one
degenerate level the representation is D(g) = U† P(g) U, with P(g) that signed permutation;
its character χ(g) = tr D(g) is reduced on the small irreps of spgrep,
n_α = (1/|G_k/T|) Σ_g χ_α(g)* χ(g) (Bradley & Cracknell, *The Mathematical Theory of Symmetry in
Solids*, 1972, ch. 4; Dresselhaus, Dresselhaus & Jorio, *Group Theory*, 2008, ch. 10 —
the method, from memory). A level holding more than one irrep, beyond what time reversal sticks
together, is an accidental degeneracy and is flagged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..input.material import Material
from ..planewave.model import KCentredModel, build_k_centred_model
from ..planewave.solver import single_blas_thread
from ..units import HBAR2_OVER_2M0_EV_A2
from .groups import LittleGroup, SpaceGroupFrame, little_group, space_group_frame
from .names import irrep_names, structure_kind
from .spinor import spinor_levels

__all__ = [
    "LEVEL_TOLERANCE_EV",
    "NO_SYMMETRY",
    "LevelLabel",
    "PointSymmetry",
    "label_point",
    "label_points",
    "unlabelled_reason",
    "plane_wave_characters",
    "k_centred_states",
    "stuck_by_time_reversal",
]

#: Eigenvalues closer than this (eV) form one level (symmetric degeneracies hold to ~1e-10 eV
#: in the k-centred basis).
LEVEL_TOLERANCE_EV: float = 1e-5

#: The label of every level of a crystal without point symmetry.
NO_SYMMETRY: str = "no symmetry beyond translations"


@dataclass(frozen=True)
class LevelLabel:
    """One (degenerate) level at a k-point and the irreps its eigenvectors carry.

    Attributes
    ----------
    energy_eV : float
        Mean eigenvalue of the level (absolute, the model's zero).
    first_band : int
        Index (from 0) of its lowest band.
    degeneracy : int
        Number of bands in the level.
    irreps : tuple of int
        Index of each irrep contained (repeated by multiplicity).
    label : str
        Conventional name(s) joined by ``+`` (e.g. ``"Γ25′"``, ``"X1"``), or the neutral
        fallback ``"<point>#<n>(<dim>)"``.
    accidental : bool
        More irreps than time reversal sticks together: an accidental degeneracy.
    time_reversal : bool
        The level is two irreps (or one twice) stuck together by time reversal.
    """

    energy_eV: float
    first_band: int
    degeneracy: int
    irreps: tuple[int, ...]
    label: str
    accidental: bool
    time_reversal: bool


@dataclass(frozen=True)
class PointSymmetry:
    """The levels at one k-point labelled by irreducible representations.

    Attributes
    ----------
    point : str
        Label of the point (``"X"``) or its coordinates.
    k_frac : numpy.ndarray
        (3,) fractions of the reciprocal primitive vectors.
    space_group : str
        International symbol (``"Fd-3m"``), or ``"P1"``.
    origin : str
        The canonical origin the labels refer to (primes and X1/X3 depend on it).
    little_cogroup_order : int
        Number of point operations of the little group of k.
    irrep_names : tuple of str
        Name of each small irrep (conventional, or the neutral fallback).
    irrep_dimensions : tuple of int
    herring : tuple of int
        Herring's time-reversal indicator per irrep (+1, 0, −1).
    levels : tuple of LevelLabel
        Ascending.
    note : str
        ``""``, :data:`NO_SYMMETRY`, or why no labels were computed.
    cutoff_eV : float
        Cutoff of the k-centred basis used.
    """

    point: str
    k_frac: np.ndarray
    space_group: str
    origin: str
    little_cogroup_order: int
    irrep_names: tuple[str, ...]
    irrep_dimensions: tuple[int, ...]
    herring: tuple[int, ...]
    levels: tuple[LevelLabel, ...]
    note: str
    cutoff_eV: float

    @property
    def band_labels(self) -> tuple[str, ...]:
        """The label of the level of every band, band by band."""
        return tuple(lv.label for lv in self.levels for _ in range(lv.degeneracy))


def plane_wave_characters(frame: SpaceGroupFrame, group: LittleGroup, miller: np.ndarray,
                          vectors: np.ndarray) -> np.ndarray:
    """Diagonal elements ⟨u|P(g)|u⟩ of the little-group operations on eigenvectors u.

    Parameters
    ----------
    frame, group
        Operations and little group (:mod:`bandpert.symmetry.groups`).
    miller : numpy.ndarray
        (n, 3) G of the k-centred basis (reciprocal primitive coordinates).
    vectors : numpy.ndarray
        (n, b) orthonormal eigenvectors (columns).

    Returns
    -------
    numpy.ndarray
        (m, b) complex diagonal elements ⟨u|P(g)|u⟩ per operation and eigenvector; the
        character of a level is the sum over its eigenvectors.
    """
    k = group.k_frac
    miller = np.asarray(miller, dtype=np.int64)
    lo = miller.min(axis=0)
    span = miller.max(axis=0) - lo + 1
    strides = np.array([span[1] * span[2], span[2], 1], dtype=np.int64)
    code = (miller - lo) @ strides
    order = np.argsort(code)
    sorted_code = code[order]
    vectors = np.asarray(vectors)
    out = np.empty((group.order, vectors.shape[1]), dtype=complex)
    inverse = np.linalg.inv(frame.rotations[group.indices])
    for j, n in enumerate(group.indices):
        q = (k + miller) @ inverse[j]  # rotated k+G (rows)
        m2 = np.rint(q - k).astype(np.int64)
        phase = np.exp(-2j * np.pi * (q @ frame.translations_user[n]))
        c2 = (m2 - lo) @ strides
        pos = np.clip(np.searchsorted(sorted_code, c2), 0, code.size - 1)
        if np.any(sorted_code[pos] != c2):
            raise RuntimeError("the basis is not invariant under the little group of k")
        target = order[pos]
        out[j] = np.einsum("ij,i,ij->j", np.conj(vectors[target]), phase, vectors)
    return out


def _levels(energies: np.ndarray, tol_eV: float) -> list[tuple[int, int]]:
    """(first, size) of runs of eigenvalues closer than ``tol_eV``."""
    starts = np.concatenate([[0], np.flatnonzero(np.diff(energies) > tol_eV) + 1])
    sizes = np.diff(np.concatenate([starts, [energies.size]]))
    return [(int(a), int(b)) for a, b in zip(starts, sizes, strict=True)]


def _no_symmetry(point: str, k_frac: np.ndarray, energies: np.ndarray, note: str,
                 space_group: str, cutoff_eV: float) -> PointSymmetry:
    """Levels grouped by degeneracy alone, labelled with ``note``."""
    levels = tuple(LevelLabel(float(energies[a:a + g].mean()), a, g, (), note, g > 1, False)
                   for a, g in _levels(energies, LEVEL_TOLERANCE_EV))
    return PointSymmetry(point, k_frac, space_group, "", 1, (), (), (), levels, note, cutoff_eV)


def label_point(material: Material, cutoff_eV: float, k_frac: np.ndarray, point: str,
                n_bands: int, *, frame: SpaceGroupFrame | None = None,
                model: KCentredModel | None = None,
                origin_atom: int | None = None,
                level_tol_eV: float = LEVEL_TOLERANCE_EV,
                states: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
                ) -> PointSymmetry:
    """Label the lowest ``n_bands`` bands at k by the irreps of the little group of k.

    The bands are computed in the basis {G : ħ²|k+G|²/2m0 ≤ cutoff} centred on k, which keeps
    every operation of the little group; degenerate runs are reduced as in the module
    docstring; the top level is completed past ``n_bands`` so that it is whole.

    Parameters
    ----------
    material : Material
        A 3D crystal (1D and 2D models get :data:`NO_SYMMETRY`-style notes).
    cutoff_eV : float
        Kinetic-energy cutoff of the basis.
    k_frac : numpy.ndarray
        (3,) k in fractions of the reciprocal primitive vectors.
    point : str
        Its label.
    n_bands : int
        Number of bands to label.
    frame : SpaceGroupFrame, optional
        Reuse the operations (:func:`bandpert.symmetry.groups.space_group_frame`).
    model : KCentredModel, optional
        Reuse the model's table of V(G) (built at ``cutoff_eV`` otherwise).
    origin_atom : int, optional
        Atom at the origin for crystals without inversion (default the first atom).
    level_tol_eV : float
        Eigenvalues closer than this form one level.
    states : tuple of numpy.ndarray, optional
        ``(miller, energies_eV, vectors)`` of the k-centred basis at k, as
        :func:`k_centred_states` returns them (e.g. the full decomposition the van Hove
        classification also uses), instead of diagonalising here; for a spin–orbit model the
        spinor eigenvectors (2·len(miller) rows, spin index slowest).

    Returns
    -------
    PointSymmetry
    """
    k_frac = np.asarray(k_frac, dtype=float)
    if getattr(material, "spin_orbit", None) is not None:
        return _spinor_point(material, cutoff_eV, k_frac, point, n_bands, frame, origin_atom,
                             level_tol_eV, states)
    model = build_k_centred_model(material, cutoff_eV) if model is None else model
    miller, w, v = (k_centred_states(model, k_frac @ model.reciprocal_invA, n_bands + 12)
                    if states is None else states)
    top = w.size
    runs = [r for r in _levels(w, level_tol_eV) if r[0] < n_bands]
    if runs and runs[-1][0] + runs[-1][1] == top and top < miller.shape[0]:
        runs = runs[:-1] or runs  # a level cut by the subset: keep only whole ones
    if material.dimension != 3 or model.gamma.basis.n_components != 1:
        why = ("labels are computed for 3D spinless models only" if material.dimension == 3
               else f"labels are computed for 3D crystals only (this model is "
               f"{material.dimension}D)")
        return _no_symmetry(point, k_frac, w[:sum(r[1] for r in runs)], why, "", cutoff_eV)
    frame = space_group_frame(material, origin_atom) if frame is None else frame
    if not frame.primitive:
        return _no_symmetry(point, k_frac, w[:sum(r[1] for r in runs)],
                            "labels need a primitive cell (this cell repeats itself)",
                            frame.international, cutoff_eV)
    if frame.order == 1:
        return _no_symmetry(point, k_frac, w[:sum(r[1] for r in runs)], NO_SYMMETRY,
                            frame.international, cutoff_eV)
    group = little_group(frame, k_frac)
    names = irrep_names(frame, group, point, structure_kind(frame, material))
    levels = []
    top_band = runs[-1][0] + runs[-1][1] if runs else 0
    diag = plane_wave_characters(frame, group, miller, v[:, :top_band])
    for a, g in runs:
        chi = diag[:, a:a + g].sum(axis=1)
        mult = group.characters.conj() @ chi / group.order
        counts = np.rint(mult.real).astype(int)
        if np.max(np.abs(mult - counts)) > 1e-3 or counts @ group.dimensions != g:
            raise RuntimeError(f"characters at {point} do not reduce to whole irreps: "
                               f"{np.round(mult, 4)}")
        contained = tuple(int(i) for i in np.repeat(np.arange(counts.size), counts))
        tr = stuck_by_time_reversal(contained, group)
        label = "+".join(names[i] for i in contained)
        levels.append(LevelLabel(float(w[a:a + g].mean()), a, g, contained, label,
                                 len(contained) > 1 and not tr, tr))
    return PointSymmetry(point, k_frac, frame.international, frame.origin, group.order,
                         tuple(names), tuple(int(d) for d in group.dimensions),
                         tuple(int(h) for h in group.herring), tuple(levels), "", cutoff_eV)


def _spinor_point(material: Material, cutoff_eV: float, k_frac: np.ndarray, point: str,
                  n_bands: int, frame: SpaceGroupFrame | None, origin_atom: int | None,
                  level_tol_eV: float,
                  states: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
                  ) -> PointSymmetry:
    """Double-group labels (:mod:`bandpert.symmetry.spinor`) with Herring's spinor indicator."""
    frame = space_group_frame(material, origin_atom) if frame is None else frame
    if not frame.primitive or frame.order == 1:
        note = NO_SYMMETRY if frame.order == 1 else "labels need a primitive cell"
        return PointSymmetry(point, k_frac, frame.international, "", 1, (), (), (), (), note,
                             cutoff_eV)
    raw, names, dims, order, herring = spinor_levels(material, cutoff_eV, frame, k_frac, point,
                                                     n_bands, level_tol_eV, states)
    levels = tuple(LevelLabel(e, a, g, c, label, len(c) > 1 and not tr, tr)
                   for e, a, g, c, label, tr in raw)
    return PointSymmetry(point, k_frac, frame.international, frame.origin, order, tuple(names),
                         tuple(int(d) for d in dims), tuple(int(h) for h in herring), levels,
                         "double group (spin–orbit)", cutoff_eV)


def label_points(material: Material, cutoff_eV: float, points: dict[str, np.ndarray],
                 n_bands: int, *, model: KCentredModel | None = None,
                 origin_atom: int | None = None) -> tuple[PointSymmetry, ...]:
    """:func:`label_point` at several points, sharing the operations and the V(G) table.

    Parameters
    ----------
    material : Material
    cutoff_eV : float
    points : dict of str to numpy.ndarray
        Label → k in fractions of the reciprocal primitive vectors (e.g. the labelled points of
        :func:`bandpert.crystal.lattice.standard_path`).
    n_bands : int
    model : KCentredModel, optional
        The band structure's model (same cutoff), whose V table is reused.
    origin_atom : int, optional

    Returns
    -------
    tuple of PointSymmetry
        In the order of ``points``; empty where :func:`unlabelled_reason` gives a reason.
    """
    if unlabelled_reason(material):
        return ()
    if getattr(material, "spin_orbit", None) is None:
        model = build_k_centred_model(material, cutoff_eV) if model is None else model
    frame = space_group_frame(material, origin_atom)
    return tuple(label_point(material, cutoff_eV, np.asarray(k, dtype=float), lab, n_bands,
                             frame=frame, model=model, origin_atom=origin_atom)
                 for lab, k in points.items())


def unlabelled_reason(material: Material) -> str:
    """Why a material gets no labels (``""`` when it gets them): 1D and 2D models."""
    if material.dimension != 3:
        return (f"no labels: they are computed for 3D crystals only (this model is "
                f"{material.dimension}D)")
    return ""


def k_centred_states(model: KCentredModel, k_cart: np.ndarray, n_states: int | None = None
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Miller indices of the basis centred on k, and its lowest eigenpairs.

    H_ij = β ħ²|k+G_i|²/2m0 δ_ij + V(G_i − G_j) (β the kinetic factor), gathered from the
    model's table of V
    (:meth:`bandpert.planewave.model.KCentredModel.candidates`), in the basis
    {G : ħ²|k+G|²/2m0 ≤ cutoff}, which every little-group operation maps onto itself.
    ``n_states`` None: every eigenpair (the full decomposition).
    """
    cand, flat, table, origin = model.candidates(float(np.linalg.norm(k_cart)))
    kg = k_cart + cand.g_cart_invA
    free = HBAR2_OVER_2M0_EV_A2 * np.einsum("gi,gi->g", kg, kg)  # the cutoff's measure
    inside = np.flatnonzero(free <= model.cutoff_eV * (1 + 1e-12))
    codes = flat[inside]
    h = table[origin + codes[:, None] - codes[None, :]]
    h[np.diag_indices(inside.size)] += model.kinetic_factor * free[inside]
    if model.nonlocal_term is not None:  # nonlocal wells, built per k (planewave.nonlocal_term)
        s = model.structure_table(float(np.linalg.norm(k_cart)))
        pairs = origin + codes[:, None] - codes[None, :]
        h = h + model.nonlocal_term.matrix(kg[inside], s[:, pairs])
        h = model.nonlocal_term.orthogonalised(h, kg[inside])  # same irreps
    top = inside.size if n_states is None else min(inside.size, n_states)
    with single_blas_thread():  # small matrices: one thread (planewave.solver)
        if top == inside.size:
            w, v = scipy.linalg.eigh(h, driver="evd")
        else:
            w, v = scipy.linalg.eigh(h, subset_by_index=(0, top - 1), driver="evr")
    return cand.miller[inside], w, v


def stuck_by_time_reversal(contained: tuple[int, ...], group: LittleGroup) -> bool:
    """True when the irreps of a level are exactly a time-reversal pair (Herring's test).

    One irrep twice with indicator −1, or two irreps with indicator 0: where −k ≡ k the second
    must be the complex conjugate of the first; inside the zone (−k ≢ k) the partner is the
    irrep conjugated by an operation taking k to −k, which is not checked here.
    """
    if len(contained) != 2:
        return False
    i, j = contained
    hi, hj = group.herring[i], group.herring[j]
    if i == j:
        return bool(hi == -1)
    if hi != 0 or hj != 0:
        return False
    k2 = 2 * group.k_frac
    if not np.allclose(k2, np.rint(k2), atol=1e-9):
        return True
    return bool(np.allclose(group.characters[j], np.conj(group.characters[i]), atol=1e-6))
