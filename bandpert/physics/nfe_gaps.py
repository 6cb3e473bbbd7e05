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

The pieces live beside this module: :mod:`.nfe_results` (the result dataclasses and the
verdict rule), :mod:`.nfe_crossings` (free-electron groups and path crossings) and
:mod:`.nfe_reasons` (why a V(G − G′) vanishes); their public names are re-exported here.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import scipy.linalg
from numpy.typing import ArrayLike

from ..crystal.lattice import reciprocal_vectors, standard_path
from ..errors import InputError
from ..input.material import Material, canonical_label
from ..perturbation import lowdin_effective_hamiltonian
from ..physics.bands import default_bands
from ..planewave.cutoff import choose_cutoff
from ..planewave.model import PlaneWaveModel, build_model, centred_model
from ..symmetry.groups import SpaceGroupFrame, little_group, space_group_frame
from ..symmetry.names import irrep_names, structure_kind
from .nfe_crossings import (
    DEGENERACY_TOLERANCE_EV,
    PathCrossing,
    _segments,
    free_electron_groups,
    path_crossings,
)
from .nfe_reasons import (
    REASON_CANCEL,
    REASON_COUPLED,
    REASON_EMPTY,
    REASON_NO_COEFFICIENT,
    REASON_NO_FORM_FACTOR,
    REASON_RANGE,
    REASON_STRUCTURE,
    REASON_TAGS,
    coupling_reasons,
)
from .nfe_results import (
    CLOSED_TOLERANCE_EV,
    GAP_ABSOLUTE_TOLERANCE_EV,
    GAP_RELATIVE_TOLERANCE,
    KIND_CROSSING,
    KIND_GIVEN,
    KIND_LABELLED,
    POOR_MATCH_WEIGHT,
    VERDICT_RULE,
    DegenerateGroup,
    GapPoint,
    GapReport,
    GapVerdict,
    gap_verdict,
)
from .nfe_symmetry import group_symmetry

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


# --------------------------------------------------------------------------------------------
# one point
# --------------------------------------------------------------------------------------------


def _couplings(model: PlaneWaveModel, members: np.ndarray, v_eV: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct G − G' (up to sign) between members, their Cartesian form and ``v_eV[G, G']``.

    ``v_eV`` is the spinless (n × n) coupling: V(G − G'), plus V_NL(k + G, k + G') with
    nonlocal terms (:func:`_spin_independent`).
    """
    m = model.basis.miller[members]
    i, j = np.triu_indices(members.size, 1)
    diff = m[i] - m[j]
    vals = v_eV[members[i], members[j]].astype(complex)
    # canonical sign: first non-zero Cartesian component positive; V(−G) = V(G)*
    cart = diff @ model.reciprocal_invA
    nonzero = np.abs(cart) > 1e-9 * np.abs(cart).max(initial=1.0)
    first = np.take_along_axis(cart, np.argmax(nonzero, axis=1)[:, None], axis=1)[:, 0]
    flip = first < 0
    diff[flip] *= -1
    vals[flip] = np.conj(vals[flip])
    uniq, idx = np.unique(diff, axis=0, return_index=True)
    return uniq, uniq @ model.reciprocal_invA, vals[idx]


def _spin_independent(model: PlaneWaveModel, v_eV: np.ndarray) -> np.ndarray:
    """The spin-independent part V + V_NL(k) (n × n) of V(k) = 1₂ ⊗ (V + V_NL) + H_so.

    H_so = −i W·σ is traceless in spin, so the mean of the two spin-diagonal blocks is it.
    """
    n = model.size
    if model.n_components == 1:
        return v_eV
    return 0.5 * (v_eV[:n, :n] + v_eV[n:, n:])


def _states(members: np.ndarray, n: int, components: int) -> np.ndarray:
    """Rows of the Hamiltonian of plane waves ``members``: every spin component (slowest)."""
    return np.concatenate([members + c * n for c in range(components)])


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
    return centred_model(material, cutoff_eV, k_cart_invA, spin_orbit=True)


def examine_point(material: Material, cutoff_eV: float, k_frac: np.ndarray, label: str,
                  kind: str = KIND_GIVEN, n_levels: int = 8, *,
                  path_distance_invA: np.ndarray | None = None,
                  segment: tuple[str, str] | None = None, segment_fraction: float = np.nan,
                  only_miller: np.ndarray | None = None,
                  degeneracy_tol_eV: float = DEGENERACY_TOLERANCE_EV,
                  closed_tol_eV: float = CLOSED_TOLERANCE_EV,
                  frame: SpaceGroupFrame | None = None) -> GapPoint:
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
    frame : SpaceGroupFrame, optional
        The crystal's operations (:func:`bandpert.symmetry.space_group_frame`): each group then
        carries the irreps of its plane waves and exact levels
        (:func:`bandpert.physics.nfe_symmetry.group_symmetry`).

    Returns
    -------
    GapPoint
    """
    k_frac = np.asarray(k_frac, dtype=float)
    k_cart = k_frac @ reciprocal_vectors(material.vectors_A)
    model = k_centred_model(material, cutoff_eV, k_cart)
    comp, n = model.n_components, model.size
    if n_levels > model.matrix_size:
        raise InputError(f"{n_levels} bands asked for but the basis holds only "
                         f"{model.matrix_size} states; expected fewer bands or a larger cutoff",
                         key="bands")
    kinetic = model.kinetic_eV(k_cart)[0]
    # groups of plane waves (each one Kramers pair of spinor states with spin–orbit)
    order, first, sizes = free_electron_groups(kinetic, -(-n_levels // comp), degeneracy_tol_eV)
    top = comp * int((first + sizes).max())
    h = model.hamiltonian(k_cart)
    w, vecs = scipy.linalg.eigh(h, subset_by_index=(0, top - 1), driver="evr")
    e0, v = model.unperturbed_eV(k_cart)[0], model.perturbation_eV(k_cart)
    v_pairs = _spin_independent(model, v)
    lg = names = None
    if frame is not None:
        # a few states more than the groups need, so that the top level is whole for its
        # irreps (a separate solve: the reported exact levels stay those of the subset above)
        w_sym, v_sym = scipy.linalg.eigh(h, subset_by_index=(0, min(model.size, top + 6) - 1),
                                         driver="evr")
        lg = little_group(frame, k_frac)
        names = irrep_names(frame, lg, "k" if kind == KIND_CROSSING else label,
                            structure_kind(frame, material))
    groups = []
    for i0, g in zip(first, sizes, strict=True):
        if g < 2:
            continue
        members = order[i0:i0 + g]
        if only_miller is not None and not (
                model.basis.miller[members][:, None, :] == np.asarray(only_miller)[None]
        ).all(axis=2).any():
            continue
        states = _states(members, n, comp)
        lo, hi = comp * i0, comp * (i0 + g)
        h1 = lowdin_effective_hamiltonian(e0, v, states, order=1,
                                          degeneracy_tol=degeneracy_tol_eV)
        h2 = lowdin_effective_hamiltonian(e0, v, states, order=2,
                                          degeneracy_tol=degeneracy_tol_eV)
        cm, cg, cv = _couplings(model, members, v_pairs)
        groups.append(DegenerateGroup(
            first_index=int(lo), miller=model.basis.miller[members].copy(),
            g_cart_invA=model.basis.g_cart_invA[members].copy(),
            free_electron_eV=float(kinetic[members].mean()),
            first_order_eV=np.linalg.eigvalsh(h1), second_order_eV=np.linalg.eigvalsh(h2),
            exact_eV=w[lo:hi].copy(),
            exact_weight=np.sum(np.abs(vecs[states, lo:hi]) ** 2, axis=0),
            coupling_miller=cm, coupling_g_cart_invA=cg,
            coupling_shell_g2=np.einsum("ij,ij->i", cg, cg) / (2 * np.pi / material.a_A) ** 2,
            coupling_eV=cv, coupling_reason=coupling_reasons(material, cm, cv),
            closed_tolerance_eV=closed_tol_eV,
            symmetry=None if lg is None else group_symmetry(
                frame, lg, names, model.basis.miller, members, w_sym, v_sym, int(i0)),
            spin_components=comp))
    return GapPoint(
        label=label, kind=kind, k_frac=k_frac, k_cart_invA=k_cart,
        path_distance_invA=np.asarray([] if path_distance_invA is None else path_distance_invA,
                                      dtype=float),
        segment=segment, segment_fraction=float(segment_fraction),
        level_energies_eV=kinetic[order[first]], level_degeneracies=comp * sizes,
        level_first_indices=comp * first, groups=tuple(groups))


# --------------------------------------------------------------------------------------------
# the analysis
# --------------------------------------------------------------------------------------------


def resolve_points(material: Material, points: Sequence[str | ArrayLike] | None = None
                   ) -> list[tuple[str, np.ndarray, str]]:
    """Points to examine: path labels or fractional coordinates; default every path label.

    Parameters
    ----------
    material : Material
    points : sequence of str or array_like, optional
        Each a label of the path's points (``G``/``Gamma`` mean Γ) or d fractional
        coordinates of the reciprocal primitive vectors. Default: the labelled points of the
        standard (or custom) path in path order, each once. Coordinates that coincide with a
        labelled point take its label.

    Returns
    -------
    list of (label, k_frac, kind)

    Raises
    ------
    InputError
        For an unknown label or coordinates of the wrong dimension (key ``points``).
    """
    path_points, legs = standard_path(material)
    if points is None or len(points) == 0:
        labels = dict.fromkeys(x for leg in legs for x in leg)
        return [(lab, np.array(path_points[lab], dtype=float), KIND_LABELLED) for lab in labels]
    out = []
    for spec in points:
        if isinstance(spec, str):
            label = canonical_label(spec.strip())
            if label not in path_points:
                known = ", ".join(path_points)
                raise InputError(f"unknown point {spec!r}; expected one of {known} or "
                                 "fractional coordinates", key="points")
            out.append((label, np.array(path_points[label], dtype=float), KIND_LABELLED))
            continue
        coords = np.asarray(spec, dtype=float).ravel()
        if coords.size != material.dimension or not np.all(np.isfinite(coords)):
            raise InputError(f"{coords.tolist()} has {coords.size} coordinates; expected "
                             f"{material.dimension} finite fractions of the reciprocal "
                             "vectors, or a label", key="points")
        on_path = [lab for lab, p in path_points.items() if np.allclose(p, coords, atol=1e-12)]
        kind = KIND_LABELLED if on_path else KIND_GIVEN
        text = ", ".join(f"{x:g}" for x in coords)
        out.append((on_path[0] if on_path else f"({text})", coords, kind))
    return out


def gap_analysis(material: Material, model: PlaneWaveModel | None = None,
                 n_bands: int | None = None, cutoff_eV: float | None = None,
                 points: Sequence[str | ArrayLike] | None = None, crossings: bool = True, *,
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
    points : sequence of str or array_like, optional
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
        spinless_bands = -(-nb * material.electrons_per_band // 2)
        model = build_model(material, choose_cutoff(material.local_spinless(), spinless_bands,
                                                    cutoff_eV, False), spin_orbit=True)
    if nb > model.matrix_size:
        raise InputError(f"{nb} bands asked for but the basis holds only {model.matrix_size} "
                         "states; expected fewer bands or a larger cutoff", key="bands")
    cutoff = float(model.basis.cutoff_eV)
    b = model.reciprocal_invA
    segs = _segments(material, b)
    frame = _frame(material)
    found = []
    for label, k_frac, kind in resolve_points(material, points):
        dist = sorted({round(x, 12) for s, e, k0, k1, x0, length in segs
                       for lab, x in ((s, x0), (e, x0 + length))
                       if lab == label and kind == KIND_LABELLED})
        found.append(examine_point(material, cutoff, k_frac, label, kind, nb,
                                   path_distance_invA=np.array(dist),
                                   degeneracy_tol_eV=degeneracy_tol_eV,
                                   closed_tol_eV=closed_tol_eV, frame=frame))
    if crossings:
        for c in path_crossings(model, material, -(-nb // model.n_components),
                                degeneracy_tol_eV):
            label = f"{c.fraction:.3f} of {c.start}→{c.end}"
            pt = examine_point(material, cutoff, c.k_frac, label, KIND_CROSSING, nb,
                               path_distance_invA=np.array([c.path_distance_invA]),
                               segment=(c.start, c.end), segment_fraction=c.fraction,
                               only_miller=c.miller, degeneracy_tol_eV=degeneracy_tol_eV,
                               closed_tol_eV=closed_tol_eV, frame=frame)
            if pt.groups:
                found.append(pt)
    return GapReport(material=material, points=tuple(found), n_bands=nb,
                     cutoff_eV=float(model.basis.cutoff_eV), basis_size=model.size,
                     degeneracy_tolerance_eV=degeneracy_tol_eV, closed_tolerance_eV=closed_tol_eV,
                     crossings=crossings)


def _frame(material: Material) -> SpaceGroupFrame | None:
    """The operations for the symmetry of the groups (3D spinless primitive cells only)."""
    if material.dimension != 3 or getattr(material, "spin_orbit", None) is not None:
        return None
    frame = space_group_frame(material)
    return frame if frame.primitive else None
