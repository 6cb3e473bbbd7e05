"""What kind of point a band has at k: minimum, maximum, saddle, or a degeneracy.

A mass belongs to a critical point of a band. Before bandpert quotes one it classifies the point
by the signed inverse-mass tensor (m0/m*)_ij = (m0/ħ²) ∂²E/∂k_i∂k_j (CONVENTIONS.md, "Masses"):

- all principal curvatures positive: a **minimum**; all negative: a **maximum**;
- mixed signs: a **saddle** of index i, the number of principal directions along which the band
  curves down (Morse index; van Hove, Phys. Rev. 89, 1189 (1953));
- the band degenerate with a neighbour there and the pair splitting *linearly* in q (a non-zero
  q·π inside the degenerate set): a **crossing**, where no mass exists;
- a degenerate set splitting only quadratically (the valence top Γ25′ of silicon) is classified
  by its Löwdin curvatures over all directions, band by band.

Degeneracy is judged against the basis, not a fixed small number. The run's plane-wave basis
(|G|² below a cutoff, centred on Γ) is not invariant under the operations that map k to k + G,
so it splits some degeneracies that symmetry requires (the X1 pair of silicon by 0.018 meV). At
the point itself bandpert therefore also diagonalises H(k) in the basis |k + G|² ≤ cutoff,
which every operation of the little group of k maps onto itself, so symmetry-required
degeneracies are exact there (common practice, no source), and once more at twice the cutoff:
a splitting below :data:`SYMMETRY_SPLITTING_EV` in the centred basis is required by symmetry,
one that shrinks below :data:`VANISHING_RATIO` of itself when the cutoff doubles vanishes with the
basis; either counts as a degeneracy.

At a saddle or a crossing the nearest true extremum of the same band is searched (BFGS on the
band from small steps off the point, Hellmann–Feynman gradient), e.g. the camel's-back minimum
of the GaAs conduction band near X.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse
import scipy.sparse.csgraph

from ..input.material import Material
from ..physics.extrema import NearestExtremum, levels, momentum, nearest_extremum, splittings
from ..planewave.model import PlaneWaveModel
from ..planewave.model import centred_model as planewave_centred_model
from ..units import HBAR2_OVER_2M0_EV_A2 as C

#: A splitting (eV) below this in the basis centred on k is required by symmetry.
SYMMETRY_SPLITTING_EV = 1e-7

#: A splitting that falls below this fraction of itself when the cutoff doubles vanishes with the
#: basis (a converged physical splitting changes by far less).
VANISHING_RATIO = 0.25

#: Largest splitting (eV) considered for degeneracy at all.
CANDIDATE_SPLITTING_EV = 1e-3

#: |∇E| (eV·Å) above which a point is not stationary (1 µeV over 0.001 Å⁻¹).
STATIONARY_GRADIENT_EV_A = 1e-3

#: |2C q·π| per unit q (eV·Å) inside a degenerate set above which it splits linearly (a crossing).
LINEAR_SPLITTING_EV_A = 1e-3

#: A requested band further than this (eV) from the gap at its k gets a warning.
FAR_FROM_GAP_EV = 10.0

#: Kinds of point.
KINDS = ("minimum", "maximum", "saddle", "crossing", "not stationary")


@dataclass(frozen=True)
class CriticalPoint:
    """The classification of one band at one k.

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    saddle_index : int or None
        Principal directions along which the band curves down (0 at a minimum, d at a maximum);
        None at a crossing and at a warped saddle of a degenerate set (:func:`curvature_kind`).
    curvatures : numpy.ndarray or None
        (d,) signed principal values of m0/m* (ascending); None at a crossing.
    axes : numpy.ndarray or None
        (d, d) principal axes as columns.
    degenerate_bands : numpy.ndarray
        0-based bands degenerate with the band at k (itself included).
    degeneracy : str
        "" (none), "symmetry" (split by less than :data:`SYMMETRY_SPLITTING_EV` in the basis
        centred on k) or "basis" (the splitting vanishes as the basis grows).
    run_splittings_eV : numpy.ndarray
        (2,) distance to the next level below and above in the run's basis (inf at the ends).
    centred_splittings_eV : numpy.ndarray
        The same in the basis centred on k, at the run's cutoff and at twice it: shape (2, 2)
        (the second row NaN when no splitting below :data:`CANDIDATE_SPLITTING_EV` needed it).
    gradient_eV_A : float
        |∇E| at the point (Hellmann–Feynman, in the centred basis).
    nearest : bandpert.physics.extrema.NearestExtremum or None
        From a saddle, a crossing or a non-stationary point.
    warning : str
        "" or one line (e.g. a band far from the gap).
    """

    kind: str
    saddle_index: int | None
    curvatures: np.ndarray | None
    axes: np.ndarray | None
    degenerate_bands: np.ndarray
    degeneracy: str
    run_splittings_eV: np.ndarray
    centred_splittings_eV: np.ndarray
    gradient_eV_A: float
    nearest: NearestExtremum | None
    warning: str

    @property
    def is_extremum(self) -> bool:
        """True at a minimum or maximum: valleys, DOS masses and N_c/N_v exist only there."""
        return self.kind in ("minimum", "maximum")

    @property
    def carries_mass(self) -> bool:
        """False at a crossing (linear dispersion: no curvature, no mass)."""
        return self.kind != "crossing"

    def describe(self, band: int, where: str) -> str:
        """One line saying what the point is and, if it is no extremum, where the nearest lies."""
        name = f"band {band + 1} at {where}"
        deg = ""
        if self.degenerate_bands.size > 1:
            others = ", ".join(str(b + 1) for b in self.degenerate_bands if b != band)
            why = "by symmetry" if self.degeneracy == "symmetry" else "within the basis"
            deg = f", degenerate {why} with band(s) {others}"
        if self.kind == "crossing":
            text = (f"{name} is a crossing{deg}: the bands split linearly in k there, so no "
                    "effective mass exists")
        elif self.kind == "saddle" and self.saddle_index is None:
            text = (f"{name} is a warped saddle point{deg} (curves up along some directions "
                    "and down along others in a pattern no quadratic form has, so no index): "
                    "no valleys, density-of-states mass or N_c/N_v")
        elif self.kind == "saddle":
            down = self.saddle_index
            text = (f"{name} is a saddle point of index {down}{deg} (curves down along {down} "
                    f"of {len(self.curvatures)} principal directions): no valleys, density-of-"
                    "states mass or N_c/N_v")
        elif self.kind == "not stationary":
            text = (f"{name} is not a critical point (|∇E| = {self.gradient_eV_A:.3g} eV·Å): "
                    "no valleys, density-of-states mass or N_c/N_v")
        else:
            return f"{name} is a {self.kind}{deg}"
        if self.nearest is not None:
            n = self.nearest
            frac = ", ".join(f"{x:.4f}" for x in n.k_frac)
            along = (f", {n.along_fraction:.3f} of the way from Γ to the point (or an "
                     "equivalent one)"
                     if n.along_fraction is not None else "")
            rel = "lower" if n.kind == "minimum" else "higher"
            text += (f"; the nearest {n.kind} lies at ({frac}){along}, "
                     f"{n.below_eV * 1e3:.3g} meV {rel}")
        return text


# --------------------------------------------------------------------------------------------
# bases centred on k
# --------------------------------------------------------------------------------------------


def centred_model(material: Material, k_cart_invA: np.ndarray, cutoff_eV: float
                  ) -> PlaneWaveModel:
    """The plane-wave model on the basis ħ²|k + G|²/2m0 ≤ cutoff (invariant under the little
    group of k, so symmetry-required degeneracies at k are exact; common practice, no source):
    :func:`bandpert.planewave.model.centred_model`, in this module's argument order."""
    return planewave_centred_model(material, cutoff_eV, np.asarray(k_cart_invA, dtype=float))


def degenerate_group(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray,
                     band: int, centred: PlaneWaveModel | None = None
                     ) -> tuple[np.ndarray, str, np.ndarray, np.ndarray]:
    """The bands degenerate with ``band`` at k, judged against the basis (module docstring).

    Returns
    -------
    bands : numpy.ndarray
        0-based indices, ``band`` included.
    reason : str
        "", "symmetry" or "basis".
    run_splittings_eV : numpy.ndarray
        (2,) splittings below/above in the run's basis.
    centred_splittings_eV : numpy.ndarray
        (2, 2) the same in the centred basis at the cutoff (row 0) and twice it (row 1, NaN
        unless needed).
    """
    k = np.asarray(k_cart_invA, dtype=float)
    n = band + 4
    e_run = levels(model, k, n)[0]
    run = splittings(e_run, band)
    cutoff = model.basis.cutoff_eV
    sym = centred_model(material, k, cutoff) if centred is None else centred
    e1 = levels(sym, k, n)[0]
    e2 = None
    reasons = []
    group = [band]
    # walk down and up while consecutive levels stay degenerate
    for step in (-1, 1):
        j = band
        while 0 <= j + step < e1.size:
            lo, hi = sorted((j, j + step))
            s1 = e1[hi] - e1[lo]
            if s1 <= SYMMETRY_SPLITTING_EV:
                reasons.append("symmetry")
            elif s1 <= CANDIDATE_SPLITTING_EV:
                if e2 is None:  # twice the cutoff, only when a small splitting needs judging
                    e2 = levels(centred_model(material, k, 2.0 * cutoff), k, n)[0]
                if e2[hi] - e2[lo] > VANISHING_RATIO * s1:
                    break
                reasons.append("basis")
            else:
                break
            j += step
            group.append(j)
    centred = np.array([splittings(e1, band),
                        np.full(2, np.nan) if e2 is None else splittings(e2, band)])
    reason = "" if not reasons else ("symmetry" if "basis" not in reasons else "basis")
    return np.array(sorted(group)), reason, run, centred


# --------------------------------------------------------------------------------------------
# classification
# --------------------------------------------------------------------------------------------


def fibonacci_directions(n: int, d: int) -> np.ndarray:
    if d == 1:
        return np.array([[1.0]])
    if d == 2:
        t = np.pi * (np.arange(n) + 0.5) / n
        return np.stack([np.cos(t), np.sin(t)], axis=1)
    i = np.arange(n) + 0.5
    phi = np.arccos(1 - 2 * i / n)
    theta = np.pi * (1 + 5**0.5) * i
    return np.stack([np.cos(theta) * np.sin(phi), np.sin(theta) * np.sin(phi), np.cos(phi)],
                    axis=1)


def quadratic_fit(directions: np.ndarray, values: np.ndarray) -> np.ndarray:
    """The symmetric M with u·M·u closest (least squares) to the values along the directions."""
    d = directions.shape[1]
    pairs = [(i, j) for i in range(d) for j in range(i, d)]
    design = np.stack([directions[:, i] * directions[:, j] * (1.0 if i == j else 2.0)
                       for i, j in pairs], axis=1)
    coef = np.linalg.lstsq(design, values, rcond=None)[0]
    m = np.zeros((d, d))
    for (i, j), c in zip(pairs, coef, strict=True):
        m[i, j] = m[j, i] = c
    return m


#: Neighbours of each sampled direction when the sign regions on the sphere are joined.
SIGN_NEIGHBOURS = 6


def sign_regions(u: np.ndarray, values: np.ndarray) -> tuple[int, int]:
    """(negative, positive) numbers of connected regions of the sign of ``values`` on the sphere.

    ``u`` are unit rows, ``values`` an even function of u sampled on them (a band's curvature
    along u), so the sphere is sampled as ±u; each direction is joined to its
    :data:`SIGN_NEIGHBOURS` nearest of the same sign.
    """
    both = np.concatenate([u, -u])
    vals = np.concatenate([values, values])
    near = np.argsort(-(both @ both.T), axis=1)[:, 1:SIGN_NEIGHBOURS + 1]
    rows = np.repeat(np.arange(both.shape[0]), SIGN_NEIGHBOURS)
    cols = near.ravel()
    out = []
    for mask in (vals < 0, vals > 0):
        keep = mask[rows] & mask[cols]
        graph = scipy.sparse.coo_matrix((np.ones(int(keep.sum())), (rows[keep], cols[keep])),
                                        shape=(both.shape[0],) * 2)
        labels = scipy.sparse.csgraph.connected_components(graph, directed=False)[1]
        out.append(len(set(labels[mask].tolist())))
    return out[0], out[1]


def curvature_kind(u: np.ndarray, values: np.ndarray) -> tuple[str, int | None]:
    """Kind and index of a band from its curvatures along the unit rows ``u`` (degenerate sets).

    Up everywhere: a minimum (index 0); down everywhere: a maximum (index d); else a saddle,
    whose index is the Morse index only where the sign pattern on the sphere is a quadratic
    form's: in 3D negative on two antipodal caps and positive on a band (index 1) or the
    reverse (index 2), in 2D always 1. Any other pattern (silicon's Γ15 lower band: 4 negative
    and 8 positive regions) is a warped saddle without index (None): a warped band has no
    quadratic form, and the axes of the closest one are arbitrary where the little group makes
    it isotropic (Morse theory; common practice, no source).
    """
    d = u.shape[1]
    if np.all(values > 0):
        return "minimum", 0
    if np.all(values < 0):
        return "maximum", d
    if d < 3:
        return "saddle", 1
    return "saddle", {(2, 1): 1, (1, 2): 2}.get(sign_regions(u, values))


def classify(material: Material, model: PlaneWaveModel, k_cart_invA: np.ndarray, band: int,
             inverse_mass: np.ndarray | None = None,
             set_curvature: callable | None = None) -> CriticalPoint:
    """Classify ``band`` at k (module docstring).

    Parameters
    ----------
    material : Material
        For the basis centred on k.
    model : PlaneWaveModel
        The run's model.
    k_cart_invA : numpy.ndarray
    band : int
        0-based.
    inverse_mass : numpy.ndarray, optional
        The band's (m0/m*) tensor when it is non-degenerate (else computed in the centred basis).
    set_curvature : callable, optional
        ``set_curvature(bands, u)`` → ascending m0/m* of the degenerate set along unit u
        (Löwdin); needed for a degenerate set without linear splitting.

    Returns
    -------
    CriticalPoint
    """
    k = np.asarray(k_cart_invA, dtype=float)
    d = k.size
    sym = centred_model(material, k, model.basis.cutoff_eV)
    group, reason, run, centred = degenerate_group(material, model, k, band, sym)
    e, vec = levels(sym, k, sym.size)
    pi = momentum(sym, k, vec)
    gradient = float(np.linalg.norm(2.0 * C * np.real(pi[:, band, band])))
    warning = _far_from_gap(material, e, band)
    kind, index, curv, axes = "", None, None, None
    if group.size > 1:
        inner = pi[:, group[:, None], group[None, :]]
        linear = 2.0 * C * np.max(np.abs(inner - np.eye(group.size) * np.mean(
            np.real(np.einsum("inn->in", inner)), axis=1)[:, None, None]))
        if linear > LINEAR_SPLITTING_EV_A:
            kind = "crossing"
        elif set_curvature is not None:
            u = fibonacci_directions(200, d)
            pos = int(np.flatnonzero(group == band)[0])
            values = np.array([set_curvature(group, x)[pos] for x in u])
            # principal axes from the best quadratic form, curvatures evaluated on them
            axes = np.linalg.eigh(quadratic_fit(u, values))[1]
            curv = np.array([set_curvature(group, a)[pos] for a in axes.T])
            order = np.argsort(curv)
            w, axes = curv[order], axes[:, order]
            curv = w
            kind, index = curvature_kind(u, values)
    if not kind:
        if gradient > STATIONARY_GRADIENT_EV_A:
            kind = "not stationary"
        if inverse_mass is None:
            inverse_mass = _sum_over_states(e, pi, band, group, sym.kinetic_factor)
        w, axes = np.linalg.eigh(0.5 * (inverse_mass + inverse_mass.T))
        curv = w
        index = int(np.sum(w < 0))
        if not kind:
            kind = "minimum" if index == 0 else "maximum" if index == d else "saddle"
    nearest = None
    if kind in ("saddle", "crossing", "not stationary") and not warning:
        minimum = _wants_minimum(material, band, index, d)
        # from a saddle, step along the principal axes on which the band falls (minimum) or
        # rises (maximum); from a crossing or a sloped point, along every axis
        directions = np.eye(d)
        if kind == "saddle" and axes is not None:
            directions = axes[:, (curv < 0) if minimum else (curv > 0)].T
        nearest = nearest_extremum(model, k, band, minimum, directions=directions)
    return CriticalPoint(kind=kind, saddle_index=index, curvatures=curv, axes=axes,
                         degenerate_bands=group, degeneracy=reason, run_splittings_eV=run,
                         centred_splittings_eV=centred, gradient_eV_A=gradient, nearest=nearest,
                         warning=warning)


def _sum_over_states(e: np.ndarray, pi: np.ndarray, band: int, group: np.ndarray,
                     beta: float) -> np.ndarray:
    """m0/m* = β + 4C Σ_l Re(π_nl π_ln)/(E_n − E_l) over the states of the centred basis kept
    (π carries the kinetic factor β, :func:`~bandpert.physics.extrema.momentum`)."""
    others = np.array([i for i in range(e.size) if i not in set(group)])
    p = pi[:, band, others]
    t = np.einsum("il,jl,l->ij", p, p.conj(), 1.0 / (e[band] - e[others])).real
    return beta * np.eye(pi.shape[0]) + 2.0 * C * (t + t.T)


def _wants_minimum(material: Material, band: int, index: int | None, d: int) -> bool:
    n_el = material.valence_electrons
    if n_el and n_el % 2 == 0:
        return band >= n_el // 2
    return index is None or 2 * index < d


def _far_from_gap(material: Material, e: np.ndarray, band: int) -> str:
    n_el = material.valence_electrons
    if not n_el or n_el % 2 or n_el // 2 >= e.size:
        return ""
    lo, hi = e[n_el // 2 - 1], e[n_el // 2]
    dist = max(lo - e[band], e[band] - hi, 0.0)
    if dist <= FAR_FROM_GAP_EV:
        return ""
    return (f"band {band + 1} lies {dist:.1f} eV from the gap at this k: an empirical "
            "pseudopotential describes the bands near the gap it was fitted to, not this one")


