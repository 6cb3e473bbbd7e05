"""Gap openings at free-electron degeneracies: degenerate perturbation theory against exact levels.

In the empty lattice the levels at k are ħ²|k+G|²/2m0, one per reciprocal-lattice vector G.
Where several G give the same |k+G|² (at zone-boundary points, and where two free-electron
bands cross along a line) the crystal potential V mixes them and the degeneracy is lifted.
Degenerate perturbation theory predicts the splitting (Ashcroft & Mermin, *Solid State Physics*,
1976, ch. 9):

* first order: the eigenvalues of E0 + V_AA, the block of V(G − G') within the group A;
  for two plane waves this is E0 + V(0) ± |V(G − G')|, a gap of 2|V(G − G')|;
* second order: the eigenvalues of the Löwdin effective Hamiltonian of the group, which adds
  the coupling through every other plane wave (Löwdin, J. Chem. Phys. 19, 1396 (1951);
  :func:`bandpert.perturbation.lowdin_effective_hamiltonian`).

Beside them the exact levels from the diagonalisation of the full H(k). **Matching.** The
exact levels of a group are taken by sorted position: if the group's free-electron levels
occupy positions i … i+g−1 among all free-electron levels at k sorted by energy, its exact
levels are the exact eigenvalues i … i+g−1 of H(k). Where the potential pushes a level past a
neighbouring group this match picks the neighbour's level; ``exact_weight`` (the share of each
matched exact state on the group's plane waves) shows how good the match is.

**Basis.** At each examined k the three treatments use the plane waves with
ħ²|k+G|²/2m0 ≤ cutoff (:func:`k_centred_model`). That set is invariant under the little group
of k, so a degeneracy protected by symmetry comes out closed to rounding; the k-independent
basis |G| ≤ G_max of the band path (:func:`bandpert.planewave.build_model`) breaks the little
group slightly away from Γ (by up to a few meV at W in the 1966 silicon model at its default
cutoff), which would read as spurious small gaps. The exact levels therefore differ from the
path's exact bands at the same k by at most that truncation effect.

A degeneracy that stays closed at first order is explained per pair of plane waves: V(G − G')
is zero because the structure factor vanishes (the atoms' phases cancel, as cos(G·τ) for
G = (200)2π/a in the diamond structure), because G − G' is beyond the potential's range (no
form factor or Fourier coefficient that far out), because the shell has no form factor, or
because there is no potential at all.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..crystal.lattice import reciprocal_vectors, standard_path
from ..errors import InputError
from ..input.material import Material, canonical_label
from ..perturbation import lowdin_effective_hamiltonian
from ..physics.bands import default_bands
from ..planewave.cutoff import choose_cutoff
from ..planewave.model import PlaneWaveModel, build_model, centred_model
from ..planewave.potential import SHELL_TOLERANCE, continuous_form_factor
from ..units import HBAR2_OVER_2M0_EV_A2

__all__ = [
    "CLOSED_TOLERANCE_EV",
    "DEGENERACY_TOLERANCE_EV",
    "KIND_CROSSING",
    "KIND_GIVEN",
    "KIND_LABELLED",
    "POOR_MATCH_WEIGHT",
    "REASON_CANCEL",
    "REASON_COUPLED",
    "REASON_EMPTY",
    "REASON_NO_COEFFICIENT",
    "REASON_NO_FORM_FACTOR",
    "REASON_RANGE",
    "REASON_STRUCTURE",
    "REASON_TAGS",
    "GAP_ABSOLUTE_TOLERANCE_EV",
    "GAP_RELATIVE_TOLERANCE",
    "VERDICT_RULE",
    "DegenerateGroup",
    "GapVerdict",
    "GapPoint",
    "GapReport",
    "PathCrossing",
    "coupling_reasons",
    "examine_point",
    "free_electron_groups",
    "gap_analysis",
    "gap_verdict",
    "k_centred_model",
    "path_crossings",
    "resolve_points",
]

#: Free-electron levels closer than this (eV) are one degenerate group.
DEGENERACY_TOLERANCE_EV: float = 1e-6

#: A splitting below this (eV) counts as closed (exact eigenvalues are good to ~1e-12 eV).
CLOSED_TOLERANCE_EV: float = 1e-6

#: |V(G − G')| below this (eV) counts as zero (cos(π/2) leaves ~1e-17 of a form factor).
ZERO_COUPLING_EV: float = 1e-10

#: A matched exact state with less weight than this on the group's plane waves is flagged.
POOR_MATCH_WEIGHT: float = 0.5

KIND_LABELLED = "labelled point"
KIND_CROSSING = "crossing"
KIND_GIVEN = "given point"

REASON_COUPLED = "coupled"
REASON_STRUCTURE = "structure factor zero"
REASON_RANGE = "beyond the potential's range"
REASON_NO_FORM_FACTOR = "no form factor on that shell"
REASON_NO_COEFFICIENT = "no Fourier coefficient for that G"
REASON_EMPTY = "no potential (empty lattice)"
REASON_CANCEL = "contributions cancel"
REASON_FORM_FACTOR_ZERO = "form factor zero at that |G|"

#: Short tags of the reasons, for tables.
REASON_TAGS: dict[str, str] = {
    REASON_STRUCTURE: "SF",
    REASON_RANGE: "range",
    REASON_NO_FORM_FACTOR: "no FF",
    REASON_NO_COEFFICIENT: "no V(G)",
    REASON_EMPTY: "empty",
    REASON_CANCEL: "cancel",
    REASON_FORM_FACTOR_ZERO: "v(q)=0",
}

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
        (g,) ascending eigenvalues of E0 + V_AA (first-order degenerate theory; V(0) included).
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

    @property
    def degeneracy(self) -> int:
        """Number of plane waves in the group."""
        return int(self.miller.shape[0])

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


# --------------------------------------------------------------------------------------------
# free-electron degeneracies
# --------------------------------------------------------------------------------------------


def free_electron_groups(kinetic_eV: np.ndarray, n_levels: int,
                         tol_eV: float = DEGENERACY_TOLERANCE_EV
                         ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Group the plane waves of one k-point by equal free-electron energy.

    The free-electron (empty-lattice) levels are E_G(k) = ħ²|k+G|²/2m0 (Ashcroft & Mermin,
    *Solid State Physics*, 1976, ch. 9, the empty-lattice levels). Sorted ascending,
    consecutive levels closer than ``tol_eV`` belong to one group; the groups whose lowest
    sorted position is below ``n_levels`` are returned.

    Parameters
    ----------
    kinetic_eV : numpy.ndarray
        (n,) free-electron energies of the basis at k (``PlaneWaveModel.kinetic_eV(k)[0]``).
    n_levels : int
        Examine the groups starting below this sorted position (e.g. the number of bands).
    tol_eV : float
        Degeneracy tolerance.

    Returns
    -------
    order : numpy.ndarray
        (n,) basis indices sorted by energy (stable).
    first_indices : numpy.ndarray
        (n_groups,) sorted position of each group's first member.
    sizes : numpy.ndarray
        (n_groups,) number of plane waves in each group (its degeneracy).
    """
    e = np.asarray(kinetic_eV, dtype=float)
    order = np.argsort(e, kind="stable")
    es = e[order]
    starts = np.concatenate([[0], np.flatnonzero(np.diff(es) > tol_eV) + 1])
    sizes = np.diff(np.concatenate([starts, [e.size]]))
    keep = starts < n_levels
    return order, starts[keep], sizes[keep]


def _segments(material: Material, b: np.ndarray) -> list[tuple[str, str, np.ndarray, np.ndarray,
                                                                float, float]]:
    """(start, end, start_frac, end_frac, start_distance, length) of every path segment.

    Distances accumulate as in :func:`bandpert.lattice.sample_path` (no advance at a jump).
    """
    points, legs = standard_path(material)
    out = []
    x0 = 0.0
    for leg in legs:
        for s, e in zip(leg[:-1], leg[1:], strict=True):
            k0, k1 = np.array(points[s], dtype=float), np.array(points[e], dtype=float)
            length = float(np.linalg.norm((k1 - k0) @ b))
            out.append((s, e, k0, k1, x0, length))
            x0 += length
    return out


@dataclass(frozen=True)
class PathCrossing:
    """A crossing of free-electron bands between two labelled points of the path.

    Attributes
    ----------
    start, end : str
        Labels at the ends of the segment.
    fraction : float
        Position on the segment, 0 at ``start`` and 1 at ``end``.
    k_frac : numpy.ndarray
        (d,) the crossing point in fractions of the reciprocal primitive vectors.
    path_distance_invA : float
        Its position along the path (Å⁻¹).
    miller : numpy.ndarray
        (m, d) the G (reciprocal primitive basis) whose bands cross there.
    """

    start: str
    end: str
    fraction: float
    k_frac: np.ndarray
    path_distance_invA: float
    miller: np.ndarray


def path_crossings(model: PlaneWaveModel, material: Material, n_levels: int,
                   tol_eV: float = DEGENERACY_TOLERANCE_EV) -> list[PathCrossing]:
    """Crossings of free-electron bands between the labelled points of the path.

    Along a straight segment k(t) = k0 + t (k1 − k0), the difference of two free-electron
    energies, ħ²/2m0 (|k+G|² − |k+G'|²) = ħ²/2m0 (2 k·(G − G') + |G|² − |G'|²), is linear in t,
    so a sign change between the two ends locates the crossing exactly at
    t* = d0 / (d0 − d1) (a bisection would converge to the same point). Only bands that can be
    among the lowest ``n_levels`` on the segment are paired (a G whose minimum on the segment
    lies above the ``n_levels``-th smallest of the end-point maxima cannot be: each E_G(t) is
    convex in t), and a crossing is kept when the lower crossing band sits below sorted
    position ``n_levels`` there. Bands degenerate along the whole segment do not cross, and
    crossings at the labelled ends belong to those points. Pairs crossing at the same point
    are merged.

    Parameters
    ----------
    model : PlaneWaveModel
    material : Material
        Supplies the path (standard or custom).
    n_levels : int
        Number of lowest free-electron bands considered.
    tol_eV : float
        Energies closer than this are equal.

    Returns
    -------
    list of PathCrossing
        In path order.
    """
    b = model.reciprocal_invA
    g = model.basis.g_cart_invA
    n = g.shape[0]
    found = []
    for s, e, k0, k1, x0, length in _segments(material, b):
        c0, c1 = k0 @ b, k1 @ b
        dk = c1 - c0
        dk2 = float(dk @ dk)
        if dk2 == 0.0:
            continue
        e_ends = model.kinetic_eV(np.stack([c0, c1]))  # (2, n)
        # minimum of the convex |c0 + t dk + G|² over t in [0, 1]
        t_min = np.clip(-((c0 + g) @ dk) / dk2, 0.0, 1.0)
        kg = c0 + t_min[:, None] * dk + g
        e_min = HBAR2_OVER_2M0_EV_A2 * np.einsum("ij,ij->i", kg, kg)
        bound = np.sort(e_ends.max(axis=0))[min(n_levels, n) - 1]
        cand = np.flatnonzero(e_min <= bound + tol_eV)
        d0 = e_ends[0, cand][:, None] - e_ends[0, cand][None, :]
        d1 = e_ends[1, cand][:, None] - e_ends[1, cand][None, :]
        cross = ((d0 > tol_eV) & (d1 < -tol_eV)) | ((d0 < -tol_eV) & (d1 > tol_eV))
        i, j = np.nonzero(np.triu(cross, 1))
        if not i.size:
            continue
        t = d0[i, j] / (d0[i, j] - d1[i, j])
        srt = np.argsort(t)
        cluster = np.empty(t.size, dtype=np.intp)
        cluster[srt] = np.cumsum(np.concatenate([[0], np.diff(t[srt]) > 1e-9]))
        for c in range(int(cluster.max()) + 1):
            here = cluster == c
            tk = float(t[here][0])  # exact for this pair; the others agree to rounding
            bands = np.unique(np.concatenate([cand[i[here]], cand[j[here]]]))
            k_frac = k0 + tk * (k1 - k0)
            order = np.argsort(model.kinetic_eV(k_frac @ b)[0], kind="stable")
            position = np.empty(n, dtype=np.intp)
            position[order] = np.arange(n)
            if position[bands].min() < n_levels:
                found.append(PathCrossing(s, e, float(tk), k_frac, x0 + float(tk) * length,
                                          model.basis.miller[bands].copy()))
    return found


# --------------------------------------------------------------------------------------------
# why a Fourier coefficient vanishes
# --------------------------------------------------------------------------------------------


def coupling_reasons(material: Material, miller: np.ndarray, values_eV: np.ndarray,
                     zero_eV: float = ZERO_COUPLING_EV) -> tuple[str, ...]:
    """Say, for each G, whether V(G) couples and, if it is zero, why.

    The potential forms are those of CONVENTIONS.md. With atoms at τ_j and form factors on
    shells of |G|² (Cohen & Bergstresser, Phys. Rev. 141, 789 (1966), eq. 2),

    * symmetric–antisymmetric: V(G) = V_S(|G|²) S_S(G) + i V_A(|G|²) S_A(G) with
      S_S = cos(G·τ), S_A = sin(G·τ) (up to the phase of the bond centre);
    * per species: V(G) = Σ_s v_s(|G|²) S_s(G), S_s(G) = (1/N) Σ_{j of species s} e^{−iG·τ_j};

    the first rule that applies to a zero V(G) names the reason:

    1. ``"no potential (empty lattice)"``: the form is empty or every value is zero;
    2. ``"structure factor zero"``: every structure factor multiplying a non-zero form factor
       of the potential vanishes at G, so no form factor on that shell could couple
       (e.g. cos(G·τ) = 0 for G = (200)2π/a in the diamond structure, where V_A ≡ 0);
    3. ``"beyond the potential's range"``: |G|² exceeds every shell (or Fourier coefficient)
       at which the potential is non-zero;
    4. ``"no form factor on that shell"`` (``"no Fourier coefficient for that G"``): within
       the range but nothing listed (or zero) there;
    5. ``"contributions cancel"``: anything else.

    Parameters
    ----------
    material : Material
    miller : numpy.ndarray
        (p, d) integer coordinates of the G in the reciprocal primitive basis.
    values_eV : numpy.ndarray
        (p,) V(G) from the model.
    zero_eV : float
        |V| at or below this is zero.

    Returns
    -------
    tuple of str
        One reason per G (``"coupled"`` where |V(G)| > ``zero_eV``).
    """
    pot = material.potential
    miller = np.atleast_2d(np.asarray(miller))
    b = reciprocal_vectors(material.vectors_A)
    g = miller @ b
    unit2 = (2.0 * np.pi / material.a_A) ** 2
    g2 = np.einsum("ij,ij->i", g, g) / unit2
    coupled = np.abs(np.asarray(values_eV)) > zero_eV
    p = g2.size
    if pot.form == "empty":
        return tuple(REASON_COUPLED if c else REASON_EMPTY for c in coupled)
    if pot.form == "fourier":
        keys = np.array(pot.miller, dtype=int).reshape(-1, material.dimension)
        vals = np.array(pot.fourier_eV, dtype=complex)
        live = np.abs(vals) > zero_eV
        if not live.any():
            return tuple(REASON_COUPLED if c else REASON_EMPTY for c in coupled)
        gk = keys[live] @ b
        reach = np.max(np.einsum("ij,ij->i", gk, gk)) / unit2
        beyond = g2 > reach * (1 + SHELL_TOLERANCE)
        return tuple(REASON_COUPLED if c else REASON_RANGE if x else REASON_NO_COEFFICIENT
                     for c, x in zip(coupled, beyond, strict=True))
    positions = np.array([a.position_frac for a in material.atoms]) @ material.vectors_A
    if pot.form == "continuous":
        return _continuous_reasons(material, g, positions, coupled, zero_eV)
    shells = np.array(pot.shells_g2, dtype=float)
    if pot.form == "symmetric-antisymmetric":
        centre = positions.mean(axis=0)
        tau = positions[0] - centre
        tables = [np.array(pot.symmetric_eV, dtype=float),
                  np.array(pot.antisymmetric_eV, dtype=float)]
        factors = [np.cos(g @ tau), np.sin(g @ tau)]
    else:
        species = list(dict.fromkeys(a.species for a in material.atoms))
        tables = [np.array(pot.species_eV[s], dtype=float) for s in species]
        factors = []
        for s in species:
            mine = np.array([a.species == s for a in material.atoms])
            factors.append(np.exp(-1j * (g @ positions[mine].T)).sum(axis=1) / len(positions))
    live_tables = [t for t in tables if np.any(np.abs(t) > zero_eV)]
    if not live_tables:
        return tuple(REASON_COUPLED if c else REASON_EMPTY for c in coupled)
    sf_zero = np.ones(p, dtype=bool)
    for t, f in zip(tables, factors, strict=True):
        if np.any(np.abs(t) > zero_eV):
            sf_zero &= np.abs(f) < 1e-9
    live_shell = np.zeros(shells.size, dtype=bool)
    for t in live_tables:
        live_shell |= np.abs(t) > zero_eV
    reach = shells[live_shell].max()
    beyond = g2 > reach * (1 + SHELL_TOLERANCE)
    on_live = (np.abs(g2[:, None] - shells[live_shell][None, :])
               <= SHELL_TOLERANCE * np.maximum(shells[live_shell], 1.0)).any(axis=1)
    return _first_reason(coupled, ((sf_zero, REASON_STRUCTURE), (beyond, REASON_RANGE),
                                   (~on_live, REASON_NO_FORM_FACTOR)))


def _continuous_reasons(material: Material, g: np.ndarray, positions: np.ndarray,
                        coupled: np.ndarray, zero_eV: float) -> tuple[str, ...]:
    """:func:`coupling_reasons` for the continuous form v_s(|G|) (:mod:`bandpert.formfactor`).

    Rule 3 ("beyond the potential's range") applies from the upper end of the taper on; rule 4
    becomes "form factor zero at that |G|" (every v_s vanishes there, e.g. at q² = a2).
    """

    pot = material.potential
    q = np.linalg.norm(g, axis=1)
    species = list(dict.fromkeys(a.species for a in material.atoms))
    sf_zero = np.ones(len(q), dtype=bool)
    v_zero = np.ones(len(q), dtype=bool)
    for s in species:
        mine = np.array([a.species == s for a in material.atoms])
        f = np.exp(-1j * (g @ positions[mine].T)).sum(axis=1) / len(positions)
        v = continuous_form_factor(q, *pot.continuous[s])
        live = np.abs(v) > zero_eV
        sf_zero &= ~live | (np.abs(f) < 1e-9)
        v_zero &= ~live
    beyond = (q >= pot.taper_invA[1]) if pot.taper_invA else np.zeros(len(q), dtype=bool)
    return _first_reason(coupled, ((beyond, REASON_RANGE), (v_zero, REASON_FORM_FACTOR_ZERO),
                                   (sf_zero, REASON_STRUCTURE)))


def _first_reason(coupled: np.ndarray, rules: tuple[tuple[np.ndarray, str], ...]
                  ) -> tuple[str, ...]:
    """Per G: "coupled", else the first rule whose mask holds, else "contributions cancel"."""
    out = []
    for i, c in enumerate(coupled):
        out.append(REASON_COUPLED if c else next(
            (reason for mask, reason in rules if mask[i]), REASON_CANCEL))
    return tuple(out)


# --------------------------------------------------------------------------------------------
# one point
# --------------------------------------------------------------------------------------------


def _couplings(model: PlaneWaveModel, members: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct G − G' (up to sign) between members, their Cartesian form and V(G − G')."""
    m = model.basis.miller[members]
    i, j = np.triu_indices(members.size, 1)
    diff = m[i] - m[j]
    vals = model.potential_eV[members[i], members[j]].astype(complex)
    # canonical sign: first non-zero Cartesian component positive; V(−G) = V(G)*
    cart = diff @ model.reciprocal_invA
    nonzero = np.abs(cart) > 1e-9 * np.abs(cart).max(initial=1.0)
    first = np.take_along_axis(cart, np.argmax(nonzero, axis=1)[:, None], axis=1)[:, 0]
    flip = first < 0
    diff[flip] *= -1
    vals[flip] = np.conj(vals[flip])
    uniq, idx = np.unique(diff, axis=0, return_index=True)
    return uniq, uniq @ model.reciprocal_invA, vals[idx]


def k_centred_model(material: Material, cutoff_eV: float, k_cart_invA: np.ndarray
                    ) -> PlaneWaveModel:
    """The plane-wave model at one k in the basis {G : ħ²|k+G|²/2m0 ≤ cutoff}, centred on k.

    Every operation of the little group of k maps k+G to some k+G' of the same length, so this
    basis keeps every symmetry of k and every symmetry-protected degeneracy is exact (to
    rounding). The k-independent basis |G| ≤ G_max of :func:`bandpert.planewave.build_model`,
    used along a path, breaks the little group slightly where k is not Γ (splittings of a few
    meV at W in the 1966 silicon model at the default cutoff, vanishing as the cutoff grows).
    V(G − G') is the same function (:func:`bandpert.planewave.fourier_coefficients`).

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Kinetic-energy cutoff on ħ²|k+G|²/2m0.
    k_cart_invA : numpy.ndarray
        (d,) Cartesian k (Å⁻¹).

    Returns
    -------
    PlaneWaveModel
        Its ``kinetic_eV`` must be evaluated at this same k.
    """
    return centred_model(material, cutoff_eV, k_cart_invA)


def examine_point(material: Material, cutoff_eV: float, k_frac: np.ndarray, label: str,
                  kind: str = KIND_GIVEN, n_levels: int = 8, *,
                  path_distance_invA: np.ndarray | None = None,
                  segment: tuple[str, str] | None = None, segment_fraction: float = np.nan,
                  only_miller: np.ndarray | None = None,
                  degeneracy_tol_eV: float = DEGENERACY_TOLERANCE_EV,
                  closed_tol_eV: float = CLOSED_TOLERANCE_EV) -> GapPoint:
    """Free-electron degeneracies at one k-point, predicted and exact splittings.

    For each group A of plane waves with equal |k+G|² (:func:`free_electron_groups`):
    first order, eig(E0 + V_AA); second order, eig(H_eff) with the Löwdin effective
    Hamiltonian H_eff = E0 + V_AA + ½ Σ_{l∉A} V_ml V_lm' [1/(E0 − e_l) + 1/(E0 − e_l)]
    (Löwdin, J. Chem. Phys. 19, 1396 (1951); Winkler 2003, App. B;
    :func:`bandpert.perturbation.lowdin_effective_hamiltonian`); exact, the eigenvalues of the
    full H(k) = H0(k) + V at the group's sorted positions (see the module docstring). All three
    use the basis {G : ħ²|k+G|²/2m0 ≤ cutoff} of :func:`k_centred_model`, which keeps the
    symmetry of k, so a degeneracy that symmetry protects comes out exactly closed.

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Plane-wave kinetic-energy cutoff.
    k_frac : numpy.ndarray
        (d,) k in fractions of the reciprocal primitive vectors.
    label : str
    kind : str
        ``KIND_LABELLED``, ``KIND_CROSSING`` or ``KIND_GIVEN``.
    n_levels : int
        Examine groups starting below this sorted position.
    path_distance_invA : numpy.ndarray, optional
        Positions along the path, for plotting.
    segment, segment_fraction
        For a crossing, its segment and position on it.
    only_miller : numpy.ndarray, optional
        (m, d) integer G: keep only the degenerate groups containing one of them (a crossing).
    degeneracy_tol_eV, closed_tol_eV : float
        Tolerances (eV).

    Returns
    -------
    GapPoint
    """
    k_frac = np.asarray(k_frac, dtype=float)
    k_cart = k_frac @ reciprocal_vectors(material.vectors_A)
    model = k_centred_model(material, cutoff_eV, k_cart)
    if n_levels > model.size:
        raise InputError(f"{n_levels} bands asked for but the basis holds only {model.size} "
                         "plane waves; expected fewer bands or a larger cutoff", key="bands")
    e0 = model.kinetic_eV(k_cart)[0]
    order, first, sizes = free_electron_groups(e0, n_levels, degeneracy_tol_eV)
    top = int((first + sizes).max())
    w, vecs = scipy.linalg.eigh(model.hamiltonian(k_cart), subset_by_index=(0, top - 1),
                                driver="evr")
    groups = []
    for i0, g in zip(first, sizes, strict=True):
        if g < 2:
            continue
        members = order[i0:i0 + g]
        if only_miller is not None and not (
                model.basis.miller[members][:, None, :] == np.asarray(only_miller)[None]
        ).all(axis=2).any():
            continue
        h1 = lowdin_effective_hamiltonian(e0, model.potential_eV, members, order=1,
                                          degeneracy_tol=degeneracy_tol_eV)
        h2 = lowdin_effective_hamiltonian(e0, model.potential_eV, members, order=2,
                                          degeneracy_tol=degeneracy_tol_eV)
        cm, cg, cv = _couplings(model, members)
        groups.append(DegenerateGroup(
            first_index=int(i0), miller=model.basis.miller[members].copy(),
            g_cart_invA=model.basis.g_cart_invA[members].copy(),
            free_electron_eV=float(e0[members].mean()),
            first_order_eV=np.linalg.eigvalsh(h1), second_order_eV=np.linalg.eigvalsh(h2),
            exact_eV=w[i0:i0 + g].copy(),
            exact_weight=np.sum(np.abs(vecs[members, i0:i0 + g]) ** 2, axis=0),
            coupling_miller=cm, coupling_g_cart_invA=cg,
            coupling_shell_g2=np.einsum("ij,ij->i", cg, cg) / (2 * np.pi / material.a_A) ** 2,
            coupling_eV=cv, coupling_reason=coupling_reasons(material, cm, cv),
            closed_tolerance_eV=closed_tol_eV))
    return GapPoint(
        label=label, kind=kind, k_frac=k_frac, k_cart_invA=k_cart,
        path_distance_invA=np.asarray([] if path_distance_invA is None else path_distance_invA,
                                      dtype=float),
        segment=segment, segment_fraction=float(segment_fraction),
        level_energies_eV=e0[order[first]], level_degeneracies=sizes.copy(),
        level_first_indices=first.copy(), groups=tuple(groups))


# --------------------------------------------------------------------------------------------
# the analysis
# --------------------------------------------------------------------------------------------


def resolve_points(material: Material, specs: list[str] | None = None
                   ) -> list[tuple[str, np.ndarray, str]]:
    """Points to examine: path labels or fractional coordinates; default every path label.

    Parameters
    ----------
    material : Material
    specs : list of str, optional
        Each a label of the path's points (``G``/``Gamma`` mean Γ) or d fractional
        coordinates separated by commas or spaces (``"0.5,0,0.5"``). Default: the labelled
        points of the standard (or custom) path in path order, each once.

    Returns
    -------
    list of (label, k_frac, kind)

    Raises
    ------
    InputError
        For an unknown label or coordinates of the wrong dimension (key ``points``).
    """
    points, legs = standard_path(material)
    if not specs:
        labels = dict.fromkeys(x for leg in legs for x in leg)
        return [(lab, np.array(points[lab], dtype=float), KIND_LABELLED) for lab in labels]
    out = []
    for spec in specs:
        text = spec.strip()
        parts = text.replace(",", " ").split()
        try:
            coords = np.array([float(x) for x in parts])
        except ValueError:
            coords = None
        if coords is not None and len(parts) > 0:
            if coords.size != material.dimension or not np.all(np.isfinite(coords)):
                raise InputError(f"{spec!r} has {coords.size} coordinates; expected "
                                 f"{material.dimension} finite fractions of the reciprocal "
                                 "vectors, or a label", key="points")
            on_path = [lab for lab, p in points.items() if np.allclose(p, coords, atol=1e-12)]
            kind = KIND_LABELLED if on_path else KIND_GIVEN
            out.append((on_path[0] if on_path else f"({', '.join(parts)})", coords, kind))
            continue
        label = canonical_label(text)
        if label not in points:
            known = ", ".join(points)
            raise InputError(f"unknown point {spec!r}; expected one of {known} or fractional "
                             "coordinates", key="points")
        out.append((label, np.array(points[label], dtype=float), KIND_LABELLED))
    return out


def gap_analysis(material: Material, model: PlaneWaveModel | None = None,
                 n_bands: int | None = None, cutoff_eV: float | None = None,
                 points: list[str] | None = None, crossings: bool = True, *,
                 degeneracy_tol_eV: float = DEGENERACY_TOLERANCE_EV,
                 closed_tol_eV: float = CLOSED_TOLERANCE_EV) -> GapReport:
    """Every free-electron degeneracy at the examined points, with its predicted and exact gaps.

    Degenerate perturbation theory in the nearly-free-electron model (Ashcroft & Mermin,
    *Solid State Physics*, 1976, ch. 9): at first order two plane waves coupled by V(G − G')
    split by 2|V(G − G')|; groups of more plane waves split into the eigenvalues of V_AA; the
    second order adds the Löwdin coupling through the other plane waves. See
    :func:`examine_point` for what is computed per group and the module docstring for how the
    exact levels are matched and why each point gets its own k-centred basis (at the model's
    cutoff).

    Parameters
    ----------
    material : Material
    model : PlaneWaveModel, optional
        Built from ``material``; default: built at ``cutoff_eV``, the file's cutoff or the
        converged default (:func:`bandpert.bands.converged_cutoff`).
    n_bands : int, optional
        Examine groups whose lowest sorted position is below this; default
        :func:`bandpert.bands.default_bands`.
    cutoff_eV : float, optional
        Used only when ``model`` is not given.
    points : list of str, optional
        Labels or fractional coordinates (:func:`resolve_points`); default every labelled point
        of the path.
    crossings : bool
        Also examine the crossings of free-electron bands between labelled points
        (:func:`path_crossings`), keeping at each only the groups of the crossing bands.
    degeneracy_tol_eV, closed_tol_eV : float
        Tolerances (eV).

    Returns
    -------
    GapReport
    """
    nb = default_bands(material) if n_bands is None else int(n_bands)
    if nb < 1:
        raise InputError(f"must be at least 1, got {nb}", key="n_bands")
    if model is None:
        model = build_model(material, choose_cutoff(material, nb, cutoff_eV, False))
    if nb > model.size:
        raise InputError(f"{nb} bands asked for but the basis holds only {model.size} plane "
                         "waves; expected fewer bands or a larger cutoff", key="bands")
    cutoff = float(model.basis.cutoff_eV)
    b = model.reciprocal_invA
    segs = _segments(material, b)
    found = []
    for label, k_frac, kind in resolve_points(material, points):
        dist = sorted({round(x, 12) for s, e, k0, k1, x0, length in segs
                       for lab, x in ((s, x0), (e, x0 + length))
                       if lab == label and kind == KIND_LABELLED})
        found.append(examine_point(material, cutoff, k_frac, label, kind, nb,
                                   path_distance_invA=np.array(dist),
                                   degeneracy_tol_eV=degeneracy_tol_eV,
                                   closed_tol_eV=closed_tol_eV))
    if crossings:
        for c in path_crossings(model, material, nb, degeneracy_tol_eV):
            label = f"{c.fraction:.3f} of {c.start}→{c.end}"
            pt = examine_point(material, cutoff, c.k_frac, label, KIND_CROSSING, nb,
                               path_distance_invA=np.array([c.path_distance_invA]),
                               segment=(c.start, c.end), segment_fraction=c.fraction,
                               only_miller=c.miller, degeneracy_tol_eV=degeneracy_tol_eV,
                               closed_tol_eV=closed_tol_eV)
            if pt.groups:
                found.append(pt)
    return GapReport(material=material, points=tuple(found), n_bands=nb,
                     cutoff_eV=float(model.basis.cutoff_eV), basis_size=model.size,
                     degeneracy_tolerance_eV=degeneracy_tol_eV, closed_tolerance_eV=closed_tol_eV,
                     crossings=crossings)

