"""Target quantities of a fit, their values for a material, and their parameter derivatives.

A fit's targets file (TOML, read by :func:`parse_targets`)::

    parameters = ["potential.symmetric[0]", "spin_orbit.species.Si.strength_eV"]
    cutoff_eV = 150.0                 # optional: default the converged cutoff of the start

    [[targets]]
    quantity = "energy"               # E(at) − E(from), eV
    at = "X:c1"                       # point label : band (v1 = top valence, c1 = lowest
    from = "Γ:v1"                     #   conduction, v2, c2, … counted away from the gap)
    value = 1.17
    tolerance = 0.02                  # weight 1/tolerance, same unit as value
    source = "Madelung, Semiconductors: Data Handbook (2004), from memory"

    [[targets]]
    quantity = "delta_so"             # E(Γ:v1) − E(Γ:v5): Γ8 − Γ7 (spin–orbit models)
    value = 0.044
    tolerance = 0.001
    source = "..."

    [[targets]]
    quantity = "energy"               # a conduction minimum: "min:c1" the band's lowest on
    at = "min(Γ–X):c1"                #   the path, "min(A–B):c1" its lowest on the line A–B
    from = "min:c1"                   #   (a valley that need not be the lowest)
    value = 0.11
    tolerance = 0.05
    source = "..."

    [[targets]]
    quantity = "mass"                 # m*/m0 of a band along a direction (hole masses of
    at = "Γ:c1"                       #   valence bands positive at a maximum)
    direction = [1, 0, 0]
    value = 0.067
    tolerance = 0.005
    source = "..."

Energies are exact eigenvalues of H(k) on a set of plane waves fixed per target point when the
fit starts (:class:`TargetModel`), so the targets are smooth functions of the parameters (except
where a parameter splits a degenerate level, below). Their derivatives by first-order
perturbation theory (Hellmann–Feynman: ∂E_n/∂p = ⟨n|∂H/∂p|n⟩) are in
:meth:`TargetModel.energy_derivatives`. For a level of a degenerate group they are the
eigenvalues of ∂H/∂p within the group, the k-th lowest for the k-th member
(:mod:`bandpert.physics.fit_states`): the group mean Tr(P ∂H/∂p P)/d where the parameter keeps
the group degenerate, and a one-sided derivative where it splits the group at first order (the
spin–orbit strength at exactly 0 splits the doubled spinless Γ25′ sextet into Γ8 and Γ7; the
Jacobian then gives the derivative for the strength increasing, the only way least squares can
move it from its lower bound 0). Masses are second differences of E(k) on the
same fixed basis, m*/m0 = 2 (ħ²/2m0) / (∂²E/∂k²) (negated for valence bands); with spin–orbit
coupling the two bands of a Kramers pair are averaged first (without inversion symmetry a single
branch is not analytic at the point).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..crystal.lattice import reciprocal_vectors, standard_path
from ..errors import InputError
from ..input.material import Material, canonical_label
from ..input.reader import TableReader, describe, number_list
from ..planewave.model import centred_model
from .fit_masses import (
    Stencil,
    minimum_mass_derivatives,
    stencil_mass,
    stencil_mass_derivatives,
)
from .fit_states import KOf, ParameterSlopes, PointStates
from .fit_valley import ValleyLine, find_valley_line, follow_minimum, valley_minimum

#: Quantities a target may name.
QUANTITIES = ("energy", "delta_so", "mass")

#: Step of the mass stencil, in units of 2π/a.
MASS_STEP = 0.01

#: The point name of a conduction band's minimum off the labelled points
#: (:mod:`bandpert.physics.fit_valley`): ``"min:c1"``.
MINIMUM = "min"

#: A minimum on a named line: ``"min(Γ–X)"`` (either dash).
_LINE_MINIMUM = re.compile(r"^min\(\s*([^()–-]+?)\s*[–-]\s*([^()–-]+?)\s*\)$")

#: Directions of a mass at a minimum named by words (:meth:`ValleyLine.direction`).
VALLEY_DIRECTIONS = ("along", "across")

_BAND = re.compile(r"^([vc])([1-9][0-9]*)$")


@dataclass(frozen=True)
class BandRef:
    """A band at a labelled point: ``label`` and ``side`` ("v" or "c") and ``rank`` (1, 2, …).

    ``label`` :data:`MINIMUM` is a conduction minimum: the band's lowest on the path, or with
    ``line`` (two labels) its lowest on that line.
    """

    label: str
    side: str
    rank: int
    line: tuple[str, str] | None = None

    def index(self, n_valence_bands: int) -> int:
        """0-based sorted band index."""
        return n_valence_bands - self.rank if self.side == "v" else n_valence_bands - 1 + self.rank

    def valley(self, n_valence_bands: int) -> tuple[int, tuple[str, str] | None]:
        """The key of a minimum's followed line: (band index, line or None)."""
        return self.index(n_valence_bands), self.line

    def __str__(self) -> str:
        point = self.label if self.line is None else f"{self.label}({'–'.join(self.line)})"
        return f"{point}:{self.side}{self.rank}"


@dataclass(frozen=True)
class Target:
    """One target quantity.

    Attributes
    ----------
    quantity : str
        One of :data:`QUANTITIES`.
    at, start : BandRef
        E(at) − E(start) for "energy" and "delta_so"; ``start`` is None for "mass".
    direction : numpy.ndarray, str or None
        Unit Cartesian direction of a mass, or "along"/"across" the line of a minimum.
    value, tolerance : float
        Target and tolerance (eV, or m0 for a mass).
    source, name : str
    """

    quantity: str
    at: BandRef
    start: BandRef | None
    direction: np.ndarray | str | None
    value: float
    tolerance: float
    source: str
    name: str

    @property
    def unit(self) -> str:
        return "m0" if self.quantity == "mass" else "eV"


@dataclass(frozen=True)
class FitSpec:
    """A fit: dotted keys of the varied parameters, the targets, and the cutoff (or None)."""

    parameters: tuple[str, ...]
    targets: tuple[Target, ...]
    cutoff_eV: float | None
    source: str = ""


def _band(text: Any, r: TableReader, key: str, labels: tuple[str, ...]) -> BandRef:
    if not isinstance(text, str) or ":" not in text:
        raise r.fail(key, f"expected \"POINT:BAND\" such as \"X:c1\" or \"Γ:v1\", got "
                          f"{describe(text)}")
    label, band = text.rsplit(":", 1)
    line = None
    named = _LINE_MINIMUM.match(label.strip())
    if named:
        line = tuple(canonical_label(x) for x in named.groups())
        unknown = [x for x in line if x not in labels]
        if unknown or line[0] == line[1]:
            raise r.fail(key, f"unknown line '{label.strip()}'; expected \"{MINIMUM}(A–B)\" "
                              f"with two different labels of the material's path "
                              f"({', '.join(labels)})")
        label = MINIMUM
    label = canonical_label(label.strip())
    if label not in labels and label != MINIMUM:
        raise r.fail(key, f"unknown point '{label}'; expected a label of the material's path "
                          f"({', '.join(labels)}), \"{MINIMUM}\" (a conduction minimum) or "
                          f"\"{MINIMUM}(A–B)\" (a minimum on the line A–B)")
    m = _BAND.match(band.strip())
    if not m:
        raise r.fail(key, f"unknown band '{band}'; expected v1, v2, … (valence, from the top) "
                          "or c1, c2, … (conduction, from the bottom)")
    if label == MINIMUM and m.group(1) != "c":
        raise r.fail(key, f"\"{MINIMUM}\" is the minimum of a conduction band; expected c1, "
                          "c2, …")
    return BandRef(label, m.group(1), int(m.group(2)), line)


def parse_targets(doc: dict[str, Any], source: str, material: Material) -> FitSpec:
    """Validate a targets document (module docstring) against the material it fits.

    Raises
    ------
    InputError
        Naming the file and key: unknown points or bands, unknown quantities, missing sources,
        non-positive tolerances, a Δso target for a spinless model, no parameters.
    """
    r = TableReader(doc, source)
    if material.valence_electrons is None:
        raise InputError("a fit needs the electron count to name bands (v1, c1); expected "
                         "electrons.valence in the material file", material.file,
                         "electrons.valence")
    raw = r.raw("parameters")
    if not isinstance(raw, list) or not raw or not all(isinstance(p, str) for p in raw):
        raise r.fail("parameters", "expected a non-empty array of dotted keys of the material "
                                   f"file (e.g. \"potential.symmetric[0]\"), got {describe(raw)}")
    if len(set(raw)) != len(raw):
        raise r.fail("parameters", "a key is listed twice; expected each parameter once")
    cutoff = r.number("cutoff_eV", required=False, positive=True, bounds=(0.0, 1e5),
                      meaning="a plane-wave cutoff in eV")
    labels = tuple(standard_path(material)[0])
    entries = r.raw("targets")
    if not isinstance(entries, list) or not entries:
        raise r.fail("targets", f"expected an array of [[targets]] tables, got {describe(entries)}")
    targets = []
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict):
            raise r.fail(f"targets[{i}]", f"expected a table, got {describe(entry)}")
        t = TableReader(entry, source, f"targets[{i}].")
        quantity = t.string("quantity", choices=QUANTITIES)
        direction = None
        start = None
        if quantity == "delta_so":
            if material.spin_orbit is None:
                raise t.fail("quantity", "Δso needs a model with spin-orbit coupling; expected a "
                                         "material file with a spin_orbit table")
            at, start = BandRef("Γ", "v", 1), BandRef("Γ", "v", 5)
            if "Γ" not in labels:
                raise t.fail("quantity", "Δso is taken at Γ, which the material's path lacks")
        else:
            at = _band(t.raw("at"), t, "at", labels)
        if quantity == "energy":
            start = _band(t.raw("from", required=False) or "Γ:v1", t, "from", labels)
        if quantity == "mass":
            raw_d = t.raw("direction")
            if at.label == MINIMUM and isinstance(raw_d, str):
                if raw_d not in VALLEY_DIRECTIONS:
                    raise t.fail("direction", f"unknown direction '{raw_d}'; expected \"along\" "
                                              "or \"across\" the valley's line, or [x, y, z]")
                direction = raw_d
            else:
                d = np.array(number_list(raw_d, t, "direction", length=3), float)
                if not np.linalg.norm(d) > 0:
                    raise t.fail("direction", "expected a non-zero direction")
                direction = d / np.linalg.norm(d)
        value = t.number("value", bounds=(-1e4, 1e4), meaning="eV, or m0 for a mass")
        if quantity == "mass" and value == 0:
            raise t.fail("value", "expected a non-zero mass (m*/m0)")
        tol = t.number("tolerance", positive=True, bounds=(1e-9, 1e4),
                       meaning="same unit as the value")
        src = t.string("source")
        if not src.strip():
            raise t.fail("source", "expected where the value comes from (authors, year, table)")
        default = {"energy": f"E({at}) − E({start})", "delta_so": "Δso = E(Γ8) − E(Γ7)",
                   "mass": "" if direction is None else f"mass {at} {direction}"
                   if isinstance(direction, str) else
                   f"mass {at} along {np.round(direction, 4).tolist()}"}[quantity]
        name = t.string("name", required=False, default=default)
        t.finish()
        targets.append(Target(quantity, at, start, direction, float(value), float(tol), src,
                              name))
    r.finish()
    return FitSpec(tuple(raw), tuple(targets), cutoff, source)


@dataclass
class Evaluation:
    """The targets at one parameter vector, and what computing them left behind.

    Attributes
    ----------
    states : PointStates
        The material and the eigenpairs at every point used (kept for the Jacobian).
    t_min : dict
        Valley (:meth:`BandRef.valley`) → position of its minimum on its line
        (:mod:`~bandpert.physics.fit_valley`).
    values : numpy.ndarray
        Per target (NaN for rows not asked for).
    """

    states: PointStates
    t_min: dict[tuple, float]
    values: np.ndarray

    @property
    def material(self) -> Material:
        return self.states.material


class TargetModel:
    """The plane-wave pieces the targets need, on plane-wave sets fixed at the start.

    Parameters
    ----------
    material : Material
        The starting material: fixes the plane waves of each target point (the basis
        ħ²|k+G|²/2m0 ≤ cutoff centred on that point).
    targets : tuple of Target
    cutoff_eV : float
    reuse : bool
        Share eigenpairs between the targets of one evaluation and with its Jacobian, and
        follow a minimum by the secant search (:func:`~bandpert.physics.fit_valley
        .follow_minimum`). Without it every target diagonalises its own points and minima are
        found by Brent's search: the reference the tests and the benchmark compare with.
    """

    def __init__(self, material: Material, targets: tuple[Target, ...], cutoff_eV: float,
                 reuse: bool = True):
        self.targets = targets
        self.cutoff_eV = float(cutoff_eV)
        self.reuse = reuse
        self.points_frac = {label: np.asarray(p, float)
                            for label, p in standard_path(material)[0].items()}
        self.n_valence = material.valence_electrons // material.electrons_per_band
        used = ({t.at.label for t in targets} | {t.start.label for t in targets if t.start}
                ) - {MINIMUM}
        b = reciprocal_vectors(material.vectors_A)
        self.miller = {label: centred_model(material, cutoff_eV, self.points_frac[label] @ b,
                                            spin_orbit=True).basis.miller
                       for label in sorted(used)}
        indices = [t.at.index(self.n_valence) for t in targets]
        indices += [t.start.index(self.n_valence) for t in targets if t.start]
        if min(indices) < 0:
            raise InputError(f"a target names a valence band below the lowest one (there are "
                             f"{self.n_valence} valence bands)", key="targets")
        self.n_bands = max(indices) + 4
        smallest = min((m.shape[0] for m in self.miller.values()), default=self.n_bands)
        if smallest * (2 if material.spin_orbit is not None else 1) < self.n_bands:
            raise InputError(f"{cutoff_eV:g} eV gives only {smallest} plane waves at a target "
                             f"point; expected a cutoff with at least {self.n_bands} states "
                             "(the bands the targets name, and 4 more)", key="cutoff_eV")
        self.spinor = material.spin_orbit is not None
        self._differences: dict = {}  # the distinct G − G′ of each plane-wave set
        # a conduction minimum off the labelled points: its line and plane waves, fixed now;
        # t_min and the curvature there are the warm start of the next search
        self.valleys: dict[tuple, ValleyLine] = {}
        self.t_min: dict[tuple, float] = {}
        self.curvature: dict[tuple, float | None] = {}
        for ref in [t.at for t in targets] + [t.start for t in targets if t.start]:
            valley = ref.valley(self.n_valence)
            if ref.label == MINIMUM and valley not in self.valleys:
                line = find_valley_line(material, self.cutoff_eV, valley[0], ref.line)
                self.valleys[valley], self.t_min[valley] = line, line.t_start
                self.curvature[valley] = None

    def states_of(self, material: Material) -> PointStates:
        """An empty :class:`PointStates` of the material (sharing as ``reuse`` says)."""
        return PointStates(material, self.n_bands, share=self.reuse)

    def _find_minimum(self, states: PointStates, valley: tuple) -> float:
        """E at a valley's minimum on its line; moves ``t_min`` (the next search's start)."""
        band = valley[0]
        if self.reuse:
            e, self.t_min[valley], curvature = follow_minimum(
                states, self.valleys[valley], band, self.spinor, self.t_min[valley],
                self.curvature[valley])
            self.curvature[valley] = curvature
        else:
            e, self.t_min[valley] = valley_minimum(states.material, self.valleys[valley], band,
                                                   self.spinor, self.t_min[valley], states)
        return e

    def _k_of(self, label: str) -> KOf:
        frac = self.points_frac[label]
        return lambda m: frac @ reciprocal_vectors(m.vectors_A)

    def stencil(self, material: Material, target: Target, t_min: dict[tuple, float]
                ) -> Stencil:
        """The mass stencil of a mass target (:mod:`bandpert.physics.fit_masses`); a minimum's
        is centred at ``t_min`` of its valley."""
        band = target.at.index(self.n_valence)
        if target.at.label == MINIMUM:
            valley = target.at.valley(self.n_valence)
            line = self.valleys[valley]
            miller, k0 = line.miller, line.k_frac(t_min[valley])
            direction = (line.direction(material, target.direction)
                         if isinstance(target.direction, str) else target.direction)
        else:
            miller, k0 = self.miller[target.at.label], self.points_frac[target.at.label]
            direction = target.direction
        return Stencil(miller=miller, k0_frac=np.asarray(k0, float),
                       direction=np.asarray(direction, float), band=band,
                       step_frac=MASS_STEP, sign=-1.0 if target.at.side == "v" else 1.0,
                       spinor=self.spinor)

    def evaluate(self, material: Material, rows: np.ndarray | None = None) -> Evaluation:
        """Every target's model value (eV or m0), in target order, and the states behind it.

        With ``rows`` (a boolean mask over the targets) only those are computed; the others
        are NaN (the finite-difference columns of the Jacobian need the mass rows only).
        """
        states = self.states_of(material)
        minima = {valley: self._find_minimum(states, valley) for valley in self.valleys
                  if any(rows is None or rows[i] for i, t in enumerate(self.targets)
                         if valley in _minimum_valleys(t, self.n_valence))}
        t_min = {valley: self.t_min[valley] for valley in minima}

        def level(ref: BandRef) -> float:
            if ref.label == MINIMUM:
                return minima[ref.valley(self.n_valence)]
            w, _ = states.eigenpairs(self.miller[ref.label], self._k_of(ref.label)(material))
            return float(w[ref.index(self.n_valence)])

        out = []
        for i, t in enumerate(self.targets):
            if rows is not None and not rows[i]:
                out.append(np.nan)
            elif t.quantity == "mass":
                out.append(stencil_mass(states, self.stencil(material, t, t_min)))
            else:
                out.append(level(t.at) - level(t.start))
        return Evaluation(states, t_min, np.array(out))

    def values(self, material: Material, rows: np.ndarray | None = None) -> np.ndarray:
        """The target values of :meth:`evaluate`."""
        return self.evaluate(material, rows).values

    def energy_derivatives(self, material: Material,
                           perturbed: list[tuple[Material, Material, float]],
                           evaluation: Evaluation | None = None,
                           directions: np.ndarray | None = None) -> np.ndarray:
        """∂(target)/∂p by Hellmann–Feynman: energies, and masses through their stencils.

        ∂E_n/∂p = ⟨n|∂H/∂p|n⟩, within n's degenerate group the eigenvalue of ∂H/∂p of n's rank
        in the group (module docstring), with ∂H/∂p = [H(p + δ) − H(p − δ)]/(2δ) on the same
        plane waves and fractional k (exact for the parameters H is linear in: form factors
        and spin–orbit strengths).

        Parameters
        ----------
        material : Material
            At the current parameters.
        perturbed : list of (Material, Material, float)
            Per parameter: the material at p + δ, at p − δ, and δ.
        evaluation : Evaluation, optional
            :meth:`evaluate` of the same material (its eigenpairs and minima are reused);
            evaluated here when not given.
        directions : numpy.ndarray, optional
            Per column, +1 (default) for the derivative with the parameter increasing, −1
            decreasing (:class:`~bandpert.physics.fit_states.ParameterSlopes`).

        Returns
        -------
        numpy.ndarray
            (n_targets, n_parameters).
        """
        if evaluation is None:
            evaluation = self.evaluate(material)
        states, t_min = evaluation.states, evaluation.t_min
        material = states.material
        slopes = ParameterSlopes(states, perturbed, self._differences, directions)
        jac = np.full((len(self.targets), len(perturbed)), np.nan)

        def slope(ref: BandRef) -> np.ndarray:
            band = ref.index(self.n_valence)
            if ref.label == MINIMUM:  # the envelope theorem: ∂E/∂p at the minimum's k
                valley = ref.valley(self.n_valence)
                line, t = self.valleys[valley], t_min[valley]
                miller, k_of = line.miller, (lambda m: line.k_cart(m, t))
            else:
                miller, k_of = self.miller[ref.label], self._k_of(ref.label)
            return slopes.at(miller, k_of)[band]

        for i, t in enumerate(self.targets):
            if t.quantity == "mass" and t.at.label == MINIMUM:
                band = t.at.index(self.n_valence)
                valley = t.at.valley(self.n_valence)
                line = self.valleys[valley]
                along = Stencil(line.miller, line.k_frac(t_min[valley]),
                                line.direction(material, "along"), band, MASS_STEP, 1.0,
                                self.spinor)
                jac[i] = minimum_mass_derivatives(
                    states, slopes, self.stencil(material, t, t_min), along,
                    float(np.linalg.norm(line.k_cart(material, 1.0)
                                         - line.k_cart(material, 0.0))),
                    line.end_frac - line.start_frac)
            elif t.quantity == "mass":
                jac[i] = stencil_mass_derivatives(states, slopes,
                                                  self.stencil(material, t, t_min))
            else:
                jac[i] = slope(t.at) - slope(t.start)
        return jac


def _minimum_valleys(target: Target, n_valence: int) -> set[tuple]:
    """Valleys (:meth:`BandRef.valley`) whose minimum off the labelled points the target
    needs."""
    return {ref.valley(n_valence) for ref in (target.at, target.start)
            if ref is not None and ref.label == MINIMUM}

