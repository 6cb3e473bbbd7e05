"""Results of the free-electron gap analysis: groups, points, the report and the verdict rule.

The dataclasses returned by :func:`bandpert.physics.nfe_gaps.gap_analysis` (see that module for
the physics) and the rule that judges a predicted splitting against the exact one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..input.material import Material
from .nfe_reasons import REASON_COUPLED
from .nfe_symmetry import CLOSED_BY_SYMMETRY, GroupSymmetry

__all__ = [
    "CLOSED_TOLERANCE_EV",
    "GAP_ABSOLUTE_TOLERANCE_EV",
    "GAP_RELATIVE_TOLERANCE",
    "KIND_CROSSING",
    "KIND_GIVEN",
    "KIND_LABELLED",
    "POOR_MATCH_WEIGHT",
    "VERDICT_RULE",
    "DegenerateGroup",
    "GapPoint",
    "GapReport",
    "GapVerdict",
    "gap_verdict",
]

#: A splitting below this (eV) counts as closed (exact eigenvalues are good to ~1e-12 eV).
CLOSED_TOLERANCE_EV: float = 1e-6

#: A matched exact state with less weight than this on the group's plane waves is flagged.
POOR_MATCH_WEIGHT: float = 0.5

KIND_LABELLED = "labelled point"
KIND_CROSSING = "crossing"
KIND_GIVEN = "given point"

#: A predicted splitting holds when it is within this share of the exact splitting …
GAP_RELATIVE_TOLERANCE: float = 0.10

#: … or within this many eV of it (closed or nearly closed splittings).
GAP_ABSOLUTE_TOLERANCE_EV: float = 0.005

#: The rule of :class:`GapVerdict`, as reported.
VERDICT_RULE: str = (
    f"holds when every splitting of the group is within {100 * GAP_RELATIVE_TOLERANCE:g} % of "
    f"the exact splitting or within {1e3 * GAP_ABSOLUTE_TOLERANCE_EV:g} meV of it; fails "
    "otherwise")

OPENS_FIRST = "first order"
OPENS_SECOND = "second order"
OPENS_LATER = "beyond second order"
OPENS_NEVER = "closed"


# --------------------------------------------------------------------------------------------
# results
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class GapVerdict:
    """Does an order of degenerate perturbation theory get a group's splittings right?

    Attributes
    ----------
    order : int
        1 (eigenvalues of the V block) or 2 (second-order Löwdin).
    holds : bool
        True when every splitting Δ_pred of the group satisfies |Δ_pred − Δ_exact| ≤
        max(:data:`GAP_RELATIVE_TOLERANCE` Δ_exact, :data:`GAP_ABSOLUTE_TOLERANCE_EV`).
    error_eV : float
        Δ_pred − Δ_exact at the splitting where |Δ_pred − Δ_exact| is largest (signed).
    relative_error : float or None
        That error over Δ_exact (None where the exact splitting is closed).
    rule : str
        :data:`VERDICT_RULE`.
    """

    order: int
    holds: bool
    error_eV: float
    relative_error: float | None
    rule: str = VERDICT_RULE


def gap_verdict(order: int, predicted_gaps_eV: np.ndarray, exact_gaps_eV: np.ndarray,
                closed_tolerance_eV: float = CLOSED_TOLERANCE_EV) -> GapVerdict:
    """Verdict of one order on a group's consecutive splittings (see :class:`GapVerdict`).

    The yardstick is the exact diagonalisation of the same H(k); the 10 % / 5 meV rule is the
    tool's own (common practice, no source).
    """
    diff = np.asarray(predicted_gaps_eV, float) - np.asarray(exact_gaps_eV, float)
    allowed = np.maximum(GAP_RELATIVE_TOLERANCE * np.abs(exact_gaps_eV),
                         GAP_ABSOLUTE_TOLERANCE_EV)
    worst = int(np.argmax(np.abs(diff)))
    exact = float(exact_gaps_eV[worst])
    return GapVerdict(order=order, holds=bool(np.all(np.abs(diff) <= allowed)),
                      error_eV=float(diff[worst]),
                      relative_error=None if exact <= closed_tolerance_eV
                      else float(diff[worst] / exact))


@dataclass(frozen=True)
class DegenerateGroup:
    """One free-electron degeneracy at a k-point: its plane waves, predictions and exact levels.

    Attributes
    ----------
    first_index : int
        Sorted position (from 0) of the group's lowest level among all free-electron levels
        at k; the group occupies positions ``first_index … first_index + degeneracy − 1``.
    miller : numpy.ndarray
        (g, d) integer coordinates of the group's G in the reciprocal primitive basis.
    g_cart_invA : numpy.ndarray
        (g, d) Cartesian G (Å⁻¹).
    free_electron_eV : float
        ħ²|k+G|²/2m0 of the group.
    first_order_eV : numpy.ndarray
        (g,) ascending eigenvalues of E0 + V_AA (first-order degenerate theory; V(0) included;
        2g with spin–orbit).
    second_order_eV : numpy.ndarray
        (g,) ascending eigenvalues of the second-order Löwdin effective Hamiltonian.
    exact_eV : numpy.ndarray
        (g,) exact eigenvalues ``first_index …`` of H(k) (matched by sorted position).
    exact_weight : numpy.ndarray
        (g,) Σ_{G in group} |⟨G|ψ⟩|² of each matched exact state ψ (1: pure group state).
    coupling_miller : numpy.ndarray
        (p, d) the distinct G − G' between members (one of ±: the first non-zero Cartesian
        component positive), in the reciprocal primitive basis.
    coupling_g_cart_invA : numpy.ndarray
        (p, d) the same, Cartesian (Å⁻¹).
    coupling_shell_g2 : numpy.ndarray
        (p,) |G − G'|² in units of (2π/a)².
    coupling_eV : numpy.ndarray
        (p,) complex V(G − G') (eV).
    coupling_reason : tuple of str
        Per coupling: ``"coupled"`` or why it is zero (``REASON_*`` constants).
    closed_tolerance_eV : float
        Splittings below this count as closed.
    symmetry : GroupSymmetry or None
        Irreps of the group's plane waves and of its exact levels
        (:func:`bandpert.physics.nfe_symmetry.group_symmetry`); None without point symmetry
        information (1D/2D models, non-primitive cells, spinor models).
    spin_components : int
        1 for a spinless model; 2 for spinor plane waves (spin–orbit): the group then holds
        the g plane waves times both spins, 2g states, and ``first_index``, the predicted and
        exact levels count spinor states (H0 ⊗ 1₂ and V(k) = 1₂ ⊗ (V + V_NL) + H_so in both
        orders, :meth:`~bandpert.planewave.model.PlaneWaveModel.perturbation_eV`), while
        ``coupling_eV`` is the spin-independent part V(G − G′) (+ V_NL(k + G, k + G′)), the
        spin–orbit term not included.
    """

    first_index: int
    miller: np.ndarray
    g_cart_invA: np.ndarray
    free_electron_eV: float
    first_order_eV: np.ndarray
    second_order_eV: np.ndarray
    exact_eV: np.ndarray
    exact_weight: np.ndarray
    coupling_miller: np.ndarray
    coupling_g_cart_invA: np.ndarray
    coupling_shell_g2: np.ndarray
    coupling_eV: np.ndarray
    coupling_reason: tuple[str, ...]
    closed_tolerance_eV: float = CLOSED_TOLERANCE_EV
    symmetry: GroupSymmetry | None = None
    spin_components: int = 1

    @property
    def closed_by(self) -> tuple[str | None, ...]:
        """Per consecutive exact splitting: None when open, else why it is closed.

        ``"symmetry"`` when both states belong to one irreducible level (closed at every
        order); otherwise the potential: the reasons every V(G − G′) of the group vanishes
        (structure factor, range, …) when it is uncoupled, else ``"accidental"``. Without
        symmetry information (or a level that could not be reduced), ``"unknown"``.
        """
        potential = ("accidental" if not self.uncoupled else
                     "; ".join(dict.fromkeys(r for r in self.coupling_reason)))
        out: list[str | None] = []
        for i, is_open in enumerate(self.open_gaps):
            if is_open:
                out.append(None)
            elif self.symmetry is None or self.symmetry.same_level[i] is None:
                out.append("unknown")
            else:
                out.append(CLOSED_BY_SYMMETRY if self.symmetry.same_level[i] else potential)
        return tuple(out)

    @property
    def symmetry_verdict(self) -> str:
        """One line: how the group's irreps bound its splitting, and why closed levels stay so.

        E.g. ``"closed by symmetry (X1)"``, ``"X1 + X4: may split into 2 levels; opens"``,
        ``"L1 + L2′: may split into 2 levels; closed by structure factor zero"``.
        """
        if self.symmetry is None:
            return "no symmetry information"
        s = self.symmetry
        irreps = " + ".join(s.irreps)
        closed = [c for c in self.closed_by if c is not None]
        if closed and all(c == CLOSED_BY_SYMMETRY for c in closed) and not self.open_gaps.any():
            return f"closed by symmetry ({irreps})"
        head = f"{irreps}: may split into {s.allowed_levels} level" + (
            "s" if s.allowed_levels != 1 else "")
        other = list(dict.fromkeys(c for c in closed if c != CLOSED_BY_SYMMETRY))
        parts = []
        if self.open_gaps.any():
            parts.append("opens")
        if other:
            parts.append("closed by " + ", ".join(other))
        return head + ("; " + "; ".join(parts) if parts else "")

    @property
    def degeneracy(self) -> int:
        """Number of states in the group: its plane waves times the spin components."""
        return int(self.miller.shape[0]) * self.spin_components

    @property
    def first_order_gaps_eV(self) -> np.ndarray:
        """(g − 1,) splittings between consecutive first-order levels."""
        return np.diff(self.first_order_eV)

    @property
    def second_order_gaps_eV(self) -> np.ndarray:
        """(g − 1,) splittings between consecutive second-order levels."""
        return np.diff(self.second_order_eV)

    @property
    def exact_gaps_eV(self) -> np.ndarray:
        """(g − 1,) splittings between consecutive exact levels."""
        return np.diff(self.exact_eV)

    @property
    def first_order_error_eV(self) -> np.ndarray:
        """(g,) first-order minus exact level, matched in sorted order."""
        return self.first_order_eV - self.exact_eV

    @property
    def second_order_error_eV(self) -> np.ndarray:
        """(g,) second-order minus exact level, matched in sorted order."""
        return self.second_order_eV - self.exact_eV

    @property
    def verdicts(self) -> tuple[GapVerdict, GapVerdict]:
        """First- and second-order :class:`GapVerdict` against the exact splittings."""
        return (gap_verdict(1, self.first_order_gaps_eV, self.exact_gaps_eV,
                            self.closed_tolerance_eV),
                gap_verdict(2, self.second_order_gaps_eV, self.exact_gaps_eV,
                            self.closed_tolerance_eV))

    @property
    def open_gaps(self) -> np.ndarray:
        """(g − 1,) True where the exact splitting exceeds the closed tolerance."""
        return self.exact_gaps_eV > self.closed_tolerance_eV

    @property
    def gap_opens_at(self) -> tuple[str, ...]:
        """Per consecutive splitting: the lowest order that opens it, or ``"closed"``.

        ``"first order"`` / ``"second order"`` when that prediction is open,
        ``"beyond second order"`` when only the exact splitting is, ``"closed"`` when the exact
        splitting is closed.
        """
        tol = self.closed_tolerance_eV
        out = []
        for g1, g2, ge in zip(self.first_order_gaps_eV, self.second_order_gaps_eV,
                              self.exact_gaps_eV, strict=True):
            if ge <= tol:
                out.append(OPENS_NEVER)
            elif g1 > tol:
                out.append(OPENS_FIRST)
            elif g2 > tol:
                out.append(OPENS_SECOND)
            else:
                out.append(OPENS_LATER)
        return tuple(out)

    @property
    def status(self) -> str:
        """Summary: ``"closed"`` (stays degenerate) or ``"opens at <highest order needed>"``."""
        opened = [o for o in self.gap_opens_at if o != OPENS_NEVER]
        if not opened:
            return "closed"
        for order in (OPENS_LATER, OPENS_SECOND, OPENS_FIRST):
            if order in opened:
                return f"opens at {order}"
        raise AssertionError("unreachable")

    @property
    def uncoupled(self) -> bool:
        """True when V(G − G') = 0 for every pair of the group (no first-order splitting)."""
        return all(r != REASON_COUPLED for r in self.coupling_reason)

    @property
    def uncoupled_reason(self) -> str | None:
        """Why every V(G − G') of the group is zero, shell by shell; None if some pair couples."""
        if not self.uncoupled:
            return None
        parts = []
        for reason in dict.fromkeys(self.coupling_reason):
            shells = sorted({round(float(s), 6) for s, r in
                             zip(self.coupling_shell_g2, self.coupling_reason, strict=True)
                             if r == reason})
            parts.append(f"{reason} (|G−G′|² = {', '.join(f'{s:g}' for s in shells)} (2π/a)²)")
        return "V(G−G′) = 0 for every pair: " + "; ".join(parts)

    @property
    def exact_multiplets(self) -> tuple[int, ...]:
        """Sizes of the runs of exact levels that stay degenerate, e.g. (1, 3, 3, 1)."""
        return tuple(int(x) for x in np.diff(
            np.concatenate([[0], np.flatnonzero(self.open_gaps) + 1, [self.degeneracy]])))

    @property
    def poor_match(self) -> bool:
        """True when a matched exact state lies mostly outside the group's plane waves."""
        return bool(np.min(self.exact_weight) < POOR_MATCH_WEIGHT)


@dataclass(frozen=True)
class GapPoint:
    """A k-point examined for free-electron degeneracies.

    Attributes
    ----------
    label : str
        The path label (``"X"``), ``"0.372 of Γ→X"`` for a crossing, or the coordinates given.
    kind : str
        ``"labelled point"``, ``"crossing"`` or ``"given point"``.
    k_frac : numpy.ndarray
        (d,) fractions of the reciprocal primitive vectors.
    k_cart_invA : numpy.ndarray
        (d,) Cartesian k (Å⁻¹).
    path_distance_invA : numpy.ndarray
        Positions of the point along the path (Å⁻¹, as in :class:`bandpert.lattice.KPath`);
        empty when the point is not on the path.
    segment : tuple of str or None
        For a crossing: the labels at the ends of its segment.
    segment_fraction : float
        For a crossing: where it sits on the segment (0 at the start, 1 at the end); NaN else.
    level_energies_eV : numpy.ndarray
        (n,) the distinct free-electron energies whose lowest position is below the band count.
    level_degeneracies : numpy.ndarray
        (n,) how many G share each of them.
    level_first_indices : numpy.ndarray
        (n,) sorted position of each level's first G.
    groups : tuple of DegenerateGroup
        The degenerate levels (two or more G). At a crossing, only those that contain the
        crossing bands.
    """

    label: str
    kind: str
    k_frac: np.ndarray
    k_cart_invA: np.ndarray
    path_distance_invA: np.ndarray
    segment: tuple[str, str] | None
    segment_fraction: float
    level_energies_eV: np.ndarray
    level_degeneracies: np.ndarray
    level_first_indices: np.ndarray
    groups: tuple[DegenerateGroup, ...]


@dataclass(frozen=True)
class GapReport:
    """Every examined point of a material with its degeneracies and their splittings.

    Attributes
    ----------
    material : Material
    points : tuple of GapPoint
        Labelled (or given) points first, in path order, then the crossings in path order.
    n_bands : int
        Levels examined: groups whose lowest sorted position is below ``n_bands``.
    cutoff_eV : float
        Plane-wave cutoff of the model.
    basis_size : int
        Number of plane waves of the path model (each examined point uses the k-centred basis
        of the same cutoff, of about the same size).
    degeneracy_tolerance_eV : float
        Free-electron levels closer than this form one group.
    closed_tolerance_eV : float
        Splittings below this count as closed.
    crossings : bool
        Whether crossings along the path were searched for.
    """

    material: Material
    points: tuple[GapPoint, ...]
    n_bands: int
    cutoff_eV: float
    basis_size: int
    degeneracy_tolerance_eV: float
    closed_tolerance_eV: float
    crossings: bool

