"""Why a free-electron degeneracy opens or stays closed: the irreps of its plane waves.

The plane waves of a degenerate group A (equal |k+G|²) span a representation of the little
group of k; it decomposes into small irreps, Σ_α n_α Γ_α (:mod:`bandpert.symmetry`). The crystal
potential is invariant under the group, so it only mixes states of the same irrep (Schur's
lemma; e.g. Heine, *Group Theory in Quantum Mechanics*, 1960, §7; Bradley & Cracknell 1972,
ch. 4): at every order the group splits into at most Σ_α n_α levels, the level of Γ_α keeping
the degeneracy dim Γ_α. A splitting inside one irrep is **closed by symmetry**, at every order;
a splitting between different irreps (or between copies of one irrep) is allowed, and when it
stays closed the reason is the potential's values (a structure factor that vanishes, a shell
beyond the potential's range: :mod:`bandpert.physics.nfe_reasons`), not symmetry. Diamond's
lowest pair at X is one two-dimensional irrep (X1): closed by symmetry, whatever the
potential (Herring, J. Franklin Inst. 233, 525 (1942)).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..symmetry.groups import LittleGroup, SpaceGroupFrame
from ..symmetry.labels import LEVEL_TOLERANCE_EV, plane_wave_characters, stuck_by_time_reversal

__all__ = ["CLOSED_BY_SYMMETRY", "GroupSymmetry", "decompose", "group_symmetry"]

CLOSED_BY_SYMMETRY = "symmetry"


@dataclass(frozen=True)
class GroupSymmetry:
    """The irreps of a free-electron group and of its exact levels.

    Attributes
    ----------
    irreps : tuple of str
        Decomposition of the group's plane-wave representation, one name per irrep copy, in the
        order of the little group's irreps (e.g. ``("X1",)``, ``("L1", "L2′")``).
    dimensions : tuple of int
        Dimension of each entry of ``irreps``.
    exact_labels : tuple of str or None
        Per matched exact state: the label of its level (None where the level could not be
        reduced: it is cut by the computed window).
    same_level : tuple of bool or None
        Per consecutive pair of matched exact states: True when both belong to one irreducible
        level (one irrep, or a pair stuck by time reversal); None when a level could not be
        reduced.
    """

    irreps: tuple[str, ...]
    dimensions: tuple[int, ...]
    exact_labels: tuple[str | None, ...]
    same_level: tuple[bool | None, ...]

    @property
    def allowed_levels(self) -> int:
        """Most distinct levels symmetry allows the group to split into (Σ_α n_α)."""
        return len(self.irreps)


def decompose(frame: SpaceGroupFrame, group: LittleGroup, miller: np.ndarray,
               vectors: np.ndarray) -> np.ndarray | None:
    """Multiplicities n_α of the subspace spanned by ``vectors`` (None if not whole)."""
    chi = plane_wave_characters(frame, group, miller, vectors).sum(axis=1)
    mult = group.characters.conj() @ chi / group.order
    counts = np.rint(mult.real).astype(int)
    if np.max(np.abs(mult - counts)) > 1e-3 or counts @ group.dimensions != vectors.shape[1]:
        return None
    return counts


def group_symmetry(frame: SpaceGroupFrame, group: LittleGroup, names: list[str],
                   miller: np.ndarray, members: np.ndarray, energies_eV: np.ndarray,
                   vectors: np.ndarray, first: int) -> GroupSymmetry:
    """Irreps of a free-electron group's plane waves and of its matched exact levels.

    Parameters
    ----------
    frame, group, names
        Operations, little group of k and the names of its irreps.
    miller : numpy.ndarray
        (n, 3) the k-centred basis.
    members : numpy.ndarray
        (g,) basis indices of the group.
    energies_eV : numpy.ndarray
        (m,) lowest exact eigenvalues at k (ascending).
    vectors : numpy.ndarray
        (n, m) their eigenvectors.
    first : int
        The group's matched exact states are ``first … first + g − 1``.

    Returns
    -------
    GroupSymmetry
    """
    n, g = miller.shape[0], members.size
    unit = np.zeros((n, g))
    unit[members, np.arange(g)] = 1.0
    counts = decompose(frame, group, miller, unit)
    if counts is None:
        raise RuntimeError("a free-electron group does not reduce to whole irreps")
    contained = np.repeat(np.arange(counts.size), counts)
    starts = np.concatenate([[0], np.flatnonzero(np.diff(energies_eV) > LEVEL_TOLERANCE_EV) + 1])
    ends = np.concatenate([starts[1:], [energies_eV.size]])
    run_of = np.repeat(np.arange(starts.size), ends - starts)
    run_label: dict[int, tuple[str | None, bool]] = {}
    labels: list[str | None] = []
    for state in range(first, first + g):
        r = int(run_of[state]) if state < energies_eV.size else -1
        if r not in run_label:
            c = None if r < 0 or ends[r] == energies_eV.size else decompose(
                frame, group, miller, vectors[:, starts[r]:ends[r]])
            if c is None:
                run_label[r] = (None, False)
            else:
                inside = np.repeat(np.arange(c.size), c)
                single = inside.size == 1 or stuck_by_time_reversal(
                    tuple(int(i) for i in inside), group)
                run_label[r] = ("+".join(names[i] for i in inside), single)
        labels.append(run_label[r][0])
    same: list[bool | None] = []
    for state in range(first, first + g - 1):
        if labels[state - first] is None or labels[state + 1 - first] is None:
            same.append(None)
            continue
        a, b = run_of[state], run_of[state + 1]
        same.append(bool(a == b and run_label[int(a)][1]))
    return GroupSymmetry(irreps=tuple(names[i] for i in contained),
                         dimensions=tuple(int(group.dimensions[i]) for i in contained),
                         exact_labels=tuple(labels), same_level=tuple(same))
