"""A conduction-band minimum off the labelled points, followed while a fit moves the parameters.

Silicon's conduction minimum lies about 0.85 of the way from Γ to X, at no labelled point, so a fit
to the measured indirect gap and the valley masses (m_l, m_t) needs the minimum itself. The fit
fixes, once at its start,

* the **line** of the path (two consecutive labelled points) that holds the band's lowest value
  in the starting model (13 points per segment, each diagonalised in its own basis centred on
  the point, so the search keeps the crystal's symmetry), and
* one **set of plane waves** for the whole line: the union of the centred bases
  {G : ħ²|k + G|²/2m0 ≤ cutoff} at 9 points of the line, so every k of the line sees a basis at
  least as complete as its own centred one and the energies are smooth in k and in the
  parameters (a cutoff would add and drop plane waves as they move).

During the fit the minimum E_min(p) = min_t E_n(k(t); p) is found on that line (k(t) = k_A +
t(k_B − k_A) in fractions of the reciprocal vectors) as the zero of the Hellmann–Feynman slope
dE_n/dt = ⟨n|∂H/∂k·(dk/dt)|n⟩ by secant steps warm-started at the previous minimum with its
curvature (:func:`follow_minimum`, three to five diagonalisations), falling back to Brent's
bounded search on E itself (:func:`valley_minimum`, :func:`scipy.optimize.minimize_scalar`, about
fifteen) when the secant leaves the bracket around the previous minimum or meets a curvature that
is not positive (a minimum at the end of the line). Its derivative needs no search: at an interior
minimum ∂E_n/∂t = 0, so dE_min/dp = ∂E_n/∂p at fixed k_min (the envelope theorem), which
Hellmann–Feynman gives as ⟨n|∂H/∂p|n⟩ (the group mean for a Kramers pair). Masses at the minimum
are second differences along the line ("along") and across it ("across": the unit vector
perpendicular to the line nearest to the Cartesian x axis, or y if the line is along x), on the
same plane waves; with spin–orbit coupling the Kramers pair is averaged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.optimize

from ..crystal.lattice import reciprocal_vectors, standard_path
from ..errors import InputError
from ..input.material import Material
from ..planewave.basis import k_centred_basis
from ..planewave.model import build_k_centred_model, model_on_miller
from ..planewave.solver import exact_energies
from .fit_states import PointStates

#: Points per segment of the path in the search for the line of the minimum.
SEARCH_POINTS = 13

#: Points of the line whose centred bases make up its one set of plane waves.
BASIS_POINTS = 9

#: Half-width (in t) of the bracket around the previous minimum, and Brent's tolerance on t
#: (near the rounding floor of E(t): the mass stencil is centred on the minimum found).
BRACKET_HALF_WIDTH = 0.12
T_TOLERANCE = 1e-8

#: Secant steps of :func:`follow_minimum` before it falls back to Brent; its tolerance on t
#: (the next step; the slope is accurate to about 1e-11 in t, where E(t) is flat to rounding
#: over 1e-8); its first step (in t) when no curvature is known; the least secant width (in t)
#: whose curvature is passed on.
SECANT_STEPS = 8
SECANT_TOLERANCE = 1e-10
PROBE_STEP = 1e-3
CURVATURE_MIN_DT = 1e-6


@dataclass(frozen=True)
class ValleyLine:
    """The line of the path that holds a band's minimum, and its one set of plane waves.

    Attributes
    ----------
    band : int
        0-based band index in the model's own count (spinor bands with spin–orbit).
    start_label, end_label : str
        The labelled points at t = 0 and t = 1.
    start_frac, end_frac : numpy.ndarray
        (3,) their fractions of the reciprocal vectors.
    miller : numpy.ndarray
        (n, 3) plane waves kept for every k of the line and every parameter value.
    t_start : float
        Position of the minimum in the starting model.
    """

    band: int
    start_label: str
    end_label: str
    start_frac: np.ndarray
    end_frac: np.ndarray
    miller: np.ndarray
    t_start: float

    @property
    def name(self) -> str:
        return f"{self.start_label}–{self.end_label}"

    def k_frac(self, t: float) -> np.ndarray:
        """k(t) in fractions of the reciprocal vectors."""
        return self.start_frac + t * (self.end_frac - self.start_frac)

    def k_cart(self, material: Material, t: float) -> np.ndarray:
        """k(t) in Å⁻¹ for the material's (possibly changed) lattice."""
        return self.k_frac(t) @ reciprocal_vectors(material.vectors_A)

    def direction(self, material: Material, which: str) -> np.ndarray:
        """Unit Cartesian vector along the line, or across it (module docstring)."""
        b = reciprocal_vectors(material.vectors_A)
        along = (self.end_frac - self.start_frac) @ b
        along = along / np.linalg.norm(along)
        if which == "along":
            return along
        axis = np.eye(3)[0] if abs(along[0]) < 0.9 else np.eye(3)[1]
        across = axis - (axis @ along) * along
        return across / np.linalg.norm(across)


def find_valley_line(material: Material, cutoff_eV: float, band: int,
                     segment: tuple[str, str] | None = None) -> ValleyLine:
    """The segment of the path holding the lowest value of ``band`` (the whole model, spin–orbit
    and nonlocal terms included: they can move a valley from X to L; ``band`` in the model's
    own count, spinor bands with spin–orbit), or the line between the two labelled points of
    ``segment``: there the lowest **interior** local minimum (a grid point below both
    neighbours), a valley that need not be the band's lowest and whose line may hold a lower
    end (germanium's Δ valley on Γ–X, where Γ2′ at t = 0 lies below it).

    Raises
    ------
    InputError
        If the material is not 3D (the line needs the standard path of a crystal), or the
        named ``segment`` holds no interior minimum of the band.
    """
    if material.dimension != 3:
        raise InputError("a band minimum off the labelled points needs a 3D crystal",
                         material.file, "targets")
    points, legs = standard_path(material)
    b = reciprocal_vectors(material.vectors_A)
    model = build_k_centred_model(material, cutoff_eV)
    t = np.linspace(0.0, 1.0, SEARCH_POINTS)
    best = (np.inf, "", "", 0.0)
    seen: set[tuple[str, str]] = set()
    pairs = ([segment] if segment is not None else
             [(a, z) for leg in legs for a, z in zip(leg[:-1], leg[1:], strict=True)])
    for a, z in pairs:
        if (a, z) in seen or (z, a) in seen:
            continue
        seen.add((a, z))
        fa, fz = np.asarray(points[a], float), np.asarray(points[z], float)
        k = (fa + t[:, None] * (fz - fa)) @ b
        e = exact_energies(model, k, band + 1)[:, band]
        if segment is not None:  # interior local minima only
            inner = np.flatnonzero((e[1:-1] <= e[:-2]) & (e[1:-1] <= e[2:])) + 1
            if inner.size == 0:
                raise InputError(f"band {band + 1} has no minimum inside the line {a}–{z} "
                                 f"(its lowest point there is an end); expected a line with a "
                                 "valley between its ends", material.file, "targets")
            e = np.where(np.isin(np.arange(len(e)), inner), e, np.inf)
        i = int(np.argmin(e))
        if e[i] < best[0] - 1e-9:
            best = (float(e[i]), a, z, float(t[i]))
    _, a, z, t0 = best
    fa, fz = np.asarray(points[a], float), np.asarray(points[z], float)
    sets = [k_centred_basis(b, cutoff_eV, (fa + s * (fz - fa)) @ b).miller
            for s in np.linspace(0.0, 1.0, BASIS_POINTS)]
    miller = np.unique(np.concatenate(sets), axis=0)
    return ValleyLine(band=band, start_label=a, end_label=z, start_frac=fa, end_frac=fz,
                      miller=miller, t_start=t0)


def members(band: int, spinor: bool) -> slice:
    """The band, or the Kramers pair holding it (spinor models): the levels averaged."""
    first = band - band % 2 if spinor else band
    return slice(first, first + (2 if spinor else 1))


def _band_energy(material: Material, line: ValleyLine, k_cart: np.ndarray, band: int,
                 spinor: bool, model=None) -> float:
    """E_band(k) on the line's plane waves (the Kramers-pair mean for a spinor model)."""
    model = model or model_on_miller(material, line.miller)
    w = scipy.linalg.eigh(model.hamiltonian(k_cart), eigvals_only=True,
                          subset_by_index=(0, band + 1), driver="evr", check_finite=False)
    return float(w[members(band, spinor)].mean())


def search_bracket(t_guess: float) -> tuple[float, float]:
    """The interval a search around ``t_guess`` keeps to (:data:`BRACKET_HALF_WIDTH`)."""
    return max(0.0, t_guess - BRACKET_HALF_WIDTH), min(1.0, t_guess + BRACKET_HALF_WIDTH)


def valley_minimum(material: Material, line: ValleyLine, band: int, spinor: bool,
                   t_guess: float, states: PointStates | None = None) -> tuple[float, float]:
    """(E_min in eV, t_min): the band's minimum on the line near ``t_guess`` (Brent, bounded).

    ``band`` is the band index in the material's own count (spinor bands with spin–orbit).
    With ``states`` (of the same material) the levels come from, and are kept in, it.
    """
    model = model_on_miller(material, line.miller) if states is None else None
    lo, hi = search_bracket(t_guess)

    def energy(t: float) -> float:
        k = line.k_cart(material, t)
        if states is not None:
            return float(states.eigenpairs(line.miller, k)[0][members(band, spinor)].mean())
        return _band_energy(material, line, k, band, spinor, model)

    res = scipy.optimize.minimize_scalar(energy, bounds=(lo, hi), method="bounded",
                                         options={"xatol": T_TOLERANCE})
    t_min, e_min = float(res.x), float(res.fun)
    for end in (lo, hi):  # Brent never evaluates the ends: a minimum there is checked apart
        e_end = energy(end)
        if e_end < e_min:
            t_min, e_min = end, e_end
    return e_min, t_min


def follow_minimum(states: PointStates, line: ValleyLine, band: int, spinor: bool,
                   t_guess: float, curvature: float | None = None
                   ) -> tuple[float, float, float | None]:
    """The minimum near ``t_guess`` by a secant search on the Hellmann–Feynman slope.

    dE/dt = ⟨n|∂H/∂k·(dk/dt)|n⟩ (:meth:`PointStates.k_slope`, the Kramers-pair mean) is driven
    to zero: a Newton step with ``curvature`` (d²E/dt² of the previous search, eV) or, without
    one, a probe of :data:`PROBE_STEP` downhill, then secant steps, until the next step is below
    :data:`SECANT_TOLERANCE` (below :data:`T_TOLERANCE`, the tolerance of the Brent search it
    replaces, at the last of :data:`SECANT_STEPS` steps). A step that leaves the bracket of
    :func:`valley_minimum`, a curvature that is not positive, or no convergence fall back to
    that Brent search.

    Returns
    -------
    e_min : float
        eV.
    t_min : float
    curvature : float or None
        d²E/dt² from the widest secant pair (for the next search), or the one given.
    """
    material = states.material
    lo, hi = search_bracket(t_guess)
    pair = members(band, spinor)
    dk_dt = line.k_cart(material, 1.0) - line.k_cart(material, 0.0)

    def slope(t: float) -> float:
        return float(states.k_slope(line.miller, line.k_cart(material, t), dk_dt)[pair].mean())

    t0 = min(max(t_guess, lo), hi)
    g0 = slope(t0)
    t1 = (t0 - g0 / curvature if curvature is not None and curvature > 0
          else t0 - np.copysign(PROBE_STEP, g0))
    widest, learned = 0.0, curvature
    for step in range(SECANT_STEPS):
        if not lo <= t1 <= hi or t1 == t0:
            break
        g1 = slope(t1)
        curv = (g1 - g0) / (t1 - t0)
        if not curv > 0:
            break
        if abs(t1 - t0) > max(widest, CURVATURE_MIN_DT):
            widest, learned = abs(t1 - t0), curv
        last = step == SECANT_STEPS - 1
        if abs(g1 / curv) < (T_TOLERANCE if last else SECANT_TOLERANCE):
            e = states.eigenpairs(line.miller, line.k_cart(material, t1))[0][pair].mean()
            return float(e), float(t1), learned
        t0, g0, t1 = t1, g1, t1 - g1 / curv
    e, t = valley_minimum(material, line, band, spinor, t_guess, states)
    return e, t, None
